/**
 * The weekly report on the real worker: the Cron trigger is fired through Miniflare's `scheduled()`
 * and the report read back from D1. Traffic counts are planted the real way — as counts messages on
 * the hand-off queue, written by the consumer — with invented distributions: one column moved into
 * its top decile (PSI far above 0.25), one nudged (between 0.1 and 0.25), the rest as in training.
 */
import { afterAll, beforeAll, expect, test } from "vitest";
import { parseArtifact, type ModelArtifact } from "../../../shared-model/src";
import { dayBefore } from "../../src/insights/traffic-queries";
import type { CountsMessage } from "../../src/insights/counts-message";
import { fitShopModel } from "../fixtures";
import { eventually, startWorker, type D1Like, type RunningWorker } from "../harness";

let worker: RunningWorker;
let db: D1Like;
let artifact: ModelArtifact;
const CRON = "0 4 * * 1";

beforeAll(async () => {
  // REFIT_AFTER_DAYS is long so that only drift and flag rate can make the model due here.
  worker = await startWorker({ vars: { MODEL_REFRESH_SECONDS: "0", REFIT_AFTER_DAYS: "3650" } });
  db = await worker.db();
  artifact = await parseArtifact(await fitShopModel({ version: "m20260302-cron01" }));
});
afterAll(async () => {
  await worker?.dispose();
});

async function fireCron(): Promise<void> {
  const fetcher = await worker.mf.getWorker();
  await fetcher.scheduled({ cron: CRON, scheduledTime: new Date() });
}

interface StoredReport {
  status: string;
  refit_due: number;
  model_version: string | null;
  report_json: string;
}
async function latestReport(): Promise<StoredReport> {
  const row = await db.prepare("SELECT status, refit_due, model_version, report_json FROM model_reports ORDER BY id DESC LIMIT 1").first<StoredReport>();
  if (!row) throw new Error("no report stored");
  return row;
}

/** Every count planted so far, per name and bucket, for the PSI worked by hand. */
const planted = new Map<string, number[]>();

/**
 * Counts over the 10 buckets as in training (the artifact's stored share of each bucket), except
 * where `shares` says otherwise (shares of `total`).
 */
function bucketRows(segment: string, name: string, total: number, shares?: number[]): [string, string, number, number][] {
  const j = artifact.columns.indexOf(name);
  const s = shares ?? (j >= 0 ? artifact.reference.columnShares![j] : artifact.reference.scoreShares!);
  const rows = s.map((share, b) => [segment, name, b, Math.round(share * total)] as [string, string, number, number]).filter((r) => r[3] > 0);
  const sums = planted.get(name) ?? new Array(10).fill(0);
  for (const r of rows) sums[r[2]] += r[3];
  planted.set(name, sums);
  return rows;
}

async function plant(flushId: string, scored: number, flagged: number, shifted: Record<string, number[]>): Promise<void> {
  const buckets = [...artifact.columns, "mahalanobisSq"].flatMap((name) => bucketRows("web", name, scored, shifted[name]));
  const message: CountsMessage = { kind: "counts", flushId, modelVersion: artifact.version, day: dayBefore(new Date(), 0), volumes: [["web", scored, flagged]], buckets };
  const queue = await worker.mf.getQueueProducer<CountsMessage>("FLAGS");
  await queue.send(message);
  await eventually(async () => ((await db.prepare("SELECT 1 AS ok FROM count_flushes WHERE flush_id = ?1").bind(flushId).first()) ? true : undefined), 15_000);
}

test("with no active model the report is stored as an error report and the handler does not throw", async () => {
  await fireCron();
  const report = await latestReport();
  expect(report.status).toBe("error");
  expect(report.model_version).toBeNull();
  expect(JSON.parse(report.report_json).error).toContain("no model is active");
});

test("traffic as in training leaves every column stable and the model not due for refit", async () => {
  const upload = await worker.post("/v1/models", artifact, worker.tokens.admin);
  expect(upload.status).toBe(201);
  expect((await worker.post(`/v1/models/${artifact.version}/activate`, {}, worker.tokens.admin)).status).toBe(200);
  // Flag rate exactly the expected one (the artifact's cutoff.flagRate) on 5,000 payments.
  const expected = artifact.cutoff.flagRate!;
  await plant("plant-stable-0001", 5000, Math.round(expected * 5000), {});
  await fireCron();
  const stored = await latestReport();
  expect(stored.status).toBe("ok");
  const report = JSON.parse(stored.report_json) as {
    drift: { name: string; level: string; psi: number }[];
    refitDue: boolean;
    reasons: string[];
    flagRates: { check: { verdict: string } }[];
  };
  expect(report.drift.map((r) => r.level)).toEqual(new Array(artifact.columns.length + 1).fill("stable"));
  expect(report.flagRates[0].check.verdict).toBe("as-expected");
  expect(report.refitDue).toBe(false);
  expect(stored.refit_due).toBe(0);
  expect(await db.prepare("SELECT COUNT(*) AS n FROM refit_due").first<{ n: number }>()).toEqual({ n: 0 });
});

test("a planted shift classifies PSI levels and marks the live model due for refit", async () => {
  const [shiftedColumn, nudgedColumn] = artifact.columns;
  // Added to the 5,000 even payments above: 5,000 more with the first column all in its top
  // decile, then 2,000 more (even elsewhere) whose second column sits in its top decile.
  await plant("plant-shift-0002", 5000, 300, { [shiftedColumn]: [0, 0, 0, 0, 0, 0, 0, 0, 0, 1] });
  const topDecile = await db.prepare("SELECT SUM(count) AS n FROM drift_counts WHERE name = ?1 AND bucket = 9").bind(shiftedColumn).first<{ n: number }>();
  expect(topDecile?.n).toBe(5500);
  await plant("plant-nudge-0003", 2000, 40, { [nudgedColumn]: [0, 0, 0, 0, 0, 0, 0, 0, 0, 1] });
  await fireCron();
  const stored = await latestReport();
  const report = JSON.parse(stored.report_json) as {
    drift: { name: string; level: string; psi: number }[];
    refitDue: boolean;
    reasons: string[];
    window: { payments: number };
  };
  const level = Object.fromEntries(report.drift.map((r) => [r.name, r.level]));
  const psiOf = Object.fromEntries(report.drift.map((r) => [r.name, r.psi]));
  // PSI by hand, Σ (a − e)·ln(a/e) with e the training share of each bucket stored in the artifact
  // and a the share of the planted counts (buckets empty on both sides add nothing):
  // first column: 5,000 in its top decile on top of 7,000 as in training → ≈ 0.79;
  // second column (a count with ties): 2,000 in its top bucket on top of 10,000 as in training.
  const byHand = (name: string): number => {
    const j = artifact.columns.indexOf(name);
    const counts = planted.get(name)!;
    const total = counts.reduce((a, b) => a + b, 0);
    return counts.reduce((sum, c, b) => {
      const e = artifact.reference.columnShares![j][b];
      const a = c / total;
      return a === 0 && e === 0 ? sum : sum + (Math.max(a, 1e-4) - Math.max(e, 1e-4)) * Math.log(Math.max(a, 1e-4) / Math.max(e, 1e-4));
    }, 0);
  };
  expect(level[shiftedColumn]).toBe("shifted");
  expect(psiOf[shiftedColumn]).toBeCloseTo(byHand(shiftedColumn), 9);
  expect(level[nudgedColumn]).toBe("watch");
  expect(psiOf[nudgedColumn]).toBeCloseTo(byHand(nudgedColumn), 9);
  expect(level[artifact.columns[2]]).toBe("stable");
  expect(report.window.payments).toBe(12_000);
  expect(report.refitDue).toBe(true);
  expect(report.reasons.some((r) => r.startsWith(`${shiftedColumn} shifted`))).toBe(true);
  expect(report.reasons.some((r) => r.includes("flag rate") && r.includes("above"))).toBe(true);
  const due = await db.prepare("SELECT model_version, reasons_json FROM refit_due").all<{ model_version: string; reasons_json: string }>();
  expect(due.results.map((r) => r.model_version)).toEqual([artifact.version]);
  // The model page shows the mark.
  const page = await worker.fetch("/v1/insights/model", { token: worker.tokens.analyst });
  expect(page.status).toBe(200);
  const body = (await page.json()) as { active: { refitDue: { reasons: string[] } | null }; report: { status: string } };
  expect(body.active.refitDue?.reasons).toEqual(report.reasons);
  expect(body.report.status).toBe("ok");
});

test("the report notes how long the shadow has waited, and a wait past SHADOW_WAIT_DAYS as overdue", async () => {
  const candidate = await fitShopModel({ version: "m20260302-cron03" });
  expect((await worker.post("/v1/models", candidate, worker.tokens.admin)).status).toBe(201);
  const set = await worker.fetch("/v1/models/shadow", {
    method: "PUT",
    token: worker.tokens.admin,
    headers: { "content-type": "application/json" },
    body: JSON.stringify({ version: "m20260302-cron03" }),
  });
  expect(set.status).toBe(200);
  const fetcher = await worker.mf.getWorker();
  await fetcher.scheduled({ cron: CRON, scheduledTime: new Date() });
  const fresh = JSON.parse((await latestReport()).report_json) as { shadowWait: { version: string; days: number; limitDays: number; overdue: boolean } };
  expect(fresh.shadowWait).toMatchObject({ version: "m20260302-cron03", limitDays: 14, overdue: false });
  expect(fresh.shadowWait.days).toBeLessThan(0.01);
  // Fifteen days on, still undecided: one day past the setting (14 in wrangler.toml).
  await fetcher.scheduled({ cron: CRON, scheduledTime: new Date(Date.now() + 15 * 86_400_000) });
  const late = JSON.parse((await latestReport()).report_json) as { shadowWait: { days: number; overdue: boolean } };
  expect(late.shadowWait.overdue).toBe(true);
  expect(late.shadowWait.days).toBeGreaterThan(14.99);
});

test("a malformed loop variable never fails a payment, and the weekly report stores the error naming it", async () => {
  const misconfigured = await startWorker({ vars: { MODEL_REFRESH_SECONDS: "0", DRIFT_FLUSH_PAYMENTS: "lots" } });
  try {
    const model = await fitShopModel({ version: "m20260302-cron02" });
    expect((await misconfigured.post("/v1/models", model, misconfigured.tokens.admin)).status).toBe(201);
    expect((await misconfigured.post(`/v1/models/${model.version}/activate`, {}, misconfigured.tokens.admin)).status).toBe(200);
    const scored = await misconfigured.post(
      "/v1/score",
      { transactionId: "tx-misconfigured-1", features: { amount: 42, items: 2, shippingShare: 0.15, accountAgeDays: 300, hourOfDay: 19.5 }, segment: "web" },
      misconfigured.tokens.flow,
    );
    expect(scored.status).toBe(200);
    await (await misconfigured.mf.getWorker()).scheduled({ cron: CRON, scheduledTime: new Date() });
    const row = await (await misconfigured.db()).prepare("SELECT status, report_json FROM model_reports ORDER BY id DESC LIMIT 1").first<{ status: string; report_json: string }>();
    expect(row?.status).toBe("error");
    expect(JSON.parse(row!.report_json).error).toContain("DRIFT_FLUSH_PAYMENTS");
  } finally {
    await misconfigured.dispose();
  }
});
