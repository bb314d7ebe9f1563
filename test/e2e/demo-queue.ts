/**
 * Fills a running worker's review queue with the demo scenario (Orvenna Housewares, an invented
 * shop; demo-ledger/generate.ts): fit a model on the first weeks' legitimate payments with the real
 * model core, publish and activate it through the admin API, then score the later payments through
 * POST /v1/score/batch so the flags reach D1 the way production flags do (queue → consumer).
 */
import { readFileSync } from "node:fs";
import { fitModel, parseRecordSpec, type FeatureDeclaration, type FitRow } from "../../shared-model/src";
import { generateLedger, type LedgerRow } from "../../demo-ledger/generate";
import type { StateCounts } from "../../worker/src/contract";

/** The demo model's features: skewed positives get log/log1p, the hour is cyclic. */
export const DEMO_FEATURES: FeatureDeclaration[] = [
  { name: "amount", transform: "log" },
  { name: "basketItems", transform: "log1p" },
  { name: "shippingShare", transform: "none" },
  { name: "accountAgeDays", transform: "log1p" },
  { name: "hoursSincePrevious", transform: "log1p" },
  { name: "paymentsLast24h", transform: "log1p" },
  { name: "shipDistanceKm", transform: "log1p" },
  { name: "amountVsAccountAverage", transform: "log" },
  { name: "hourOfDay", transform: "cyclic-hour" },
];

/**
 * How the demo ledger's records give those features (same names, same order): the model carries it,
 * so a refit on the records ledger derives them as the fit did.
 */
const DEMO_RECORD_SPEC = parseRecordSpec(JSON.parse(readFileSync(new URL("../../demo-ledger/spec.json", import.meta.url), "utf8")));

export interface DemoOptions {
  /** Ledger rows to generate (default 14,000). */
  rows?: number;
  /** Share of the ledger, from the start, used to fit (default 0.7). */
  trainShare?: number;
  /** Flag rate the cutoff is set for (default 0.012). */
  cutoffRate?: number;
}

export interface DemoTokens {
  admin: string;
  flow: string;
  analyst: string;
}

function featuresOf(row: LedgerRow): Record<string, number> {
  const out: Record<string, number> = {};
  for (const f of DEMO_FEATURES) out[f.name] = row[f.name as keyof LedgerRow] as number;
  return out;
}

async function call(base: string, path: string, token: string, body?: unknown): Promise<unknown> {
  const res = await fetch(`${base}${path}`, {
    method: body === undefined ? "GET" : "POST",
    headers: { authorization: `Bearer ${token}`, ...(body === undefined ? {} : { "content-type": "application/json" }) },
    body: body === undefined ? undefined : JSON.stringify(body),
  });
  const text = await res.text();
  if (!res.ok) throw new Error(`${path} answered ${res.status}: ${text.slice(0, 400)}`);
  return JSON.parse(text);
}

/**
 * Publishes the demo model and scores the later payments; resolves once every flag is in the queue.
 * @returns the model version and how many payments went to review.
 */
export async function seedDemoQueue(base: string, tokens: DemoTokens, options: DemoOptions = {}): Promise<{ version: string; flagged: number }> {
  const rows = [...generateLedger({ rows: options.rows ?? 14_000 })];
  const split = Math.floor(rows.length * (options.trainShare ?? 0.7));
  const training: FitRow[] = rows
    .slice(0, split)
    .filter((r) => r.label === "legitimate")
    .map((r) => ({ values: Float64Array.from(DEMO_FEATURES.map((f) => r[f.name as keyof LedgerRow] as number)), segment: r.channel }));
  const { artifact } = await fitModel(
    {
      async *pass() {
        yield* training;
      },
    },
    {
      features: DEMO_FEATURES,
      shape: "auto",
      estimator: "classical",
      segmentBy: "channel",
      cutoffRate: options.cutoffRate ?? 0.012,
      seed: 7,
      source: "demo ledger (Orvenna Housewares, invented)",
      recordSpec: DEMO_RECORD_SPEC,
    },
  );
  await call(base, "/v1/models", tokens.admin, artifact);
  await call(base, `/v1/models/${artifact.version}/activate`, tokens.admin, {});

  let flagged = 0;
  const later = rows.slice(split);
  for (let start = 0; start < later.length; start += 100) {
    const payments = later.slice(start, start + 100).map((r) => ({
      transactionId: r.paymentId,
      features: featuresOf(r),
      segment: r.channel,
      accountRef: r.accountRef,
    }));
    const answer = (await call(base, "/v1/score/batch", tokens.flow, { payments })) as { counts: { review: number; auditSample: number } };
    flagged += answer.counts.review + answer.counts.auditSample;
  }
  await waitForQueue(base, tokens, flagged);
  return { version: artifact.version, flagged };
}

/**
 * Resolves once the review store holds `total` items (open, claimed or decided). The consumer writes
 * review items about a second after the scoring answer, so a test that decides "every open item"
 * right after scoring must wait for them first, or items landing later stay undecided.
 */
export async function waitForQueue(base: string, tokens: DemoTokens, total: number): Promise<void> {
  const deadline = Date.now() + 60_000;
  for (;;) {
    const counts = (await call(base, "/v1/review/counts", tokens.analyst)) as StateCounts;
    if (counts.open + counts.claimed + counts.decided >= total) return;
    if (Date.now() > deadline) throw new Error(`only ${counts.open + counts.claimed + counts.decided} of ${total} review items reached the queue`);
    await new Promise((r) => setTimeout(r, 250));
  }
}
