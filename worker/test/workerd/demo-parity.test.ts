/**
 * Parity of the two derivations: the demo ledger's payment records replayed through the worker in
 * time order (the `payment` form, in batches as `npm run replay` sends them) give `derived` values
 * equal to what `isodense derive` writes for the same ledger, for every row and feature
 * (≤ 1e-12 relative). The worker derives at the accounts' Durable Objects; the CLI streams the
 * ledger; both run the shared model's record code.
 */
import { mkdtemp, readFile, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, expect, test } from "vitest";
import { captureIO } from "../../../cli/capture-io";
import { deriveCommand } from "../../../cli/commands/derive";
import { openCsvTable } from "../../../cli/csv";
import { fitModel, parseRecordSpec, recordColumns, type FitRow, type RecordSpec } from "../../../shared-model/src";
import { byTestDepth } from "../../../shared-model/src/test-support";
import { publishModel, repoRoot, startWorker, type RunningWorker } from "../harness";

const ledgerPath = join(repoRoot, "demo-ledger/sample.csv");
const specPath = join(repoRoot, "demo-ledger/spec.json");

/** Rows of a CSV file as objects keyed by header. */
async function readRows(path: string): Promise<Record<string, string>[]> {
  const table = await openCsvTable(path);
  const rows: Record<string, string>[] = [];
  for await (const row of table.rows) rows.push(Object.fromEntries(table.header.map((name, i) => [name, row.cells[i]])));
  return rows;
}

let worker: RunningWorker;
let dir: string;
let spec: RecordSpec;
let ledger: Record<string, string>[];
let derivedByCli: Record<string, string>[];

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-parity-"));
  spec = parseRecordSpec(JSON.parse(await readFile(specPath, "utf8")));
  const out = join(dir, "features.csv");
  const capture = captureIO();
  const status = await deriveCommand([ledgerPath, "--spec", specPath, "--out", out], capture.io);
  if (status !== 0) throw new Error(`isodense derive failed (${status}): ${capture.err()}`);
  [ledger, derivedByCli] = await Promise.all([readRows(ledgerPath), readRows(out)]);
  // A model fitted to the derived rows, carrying the demo spec, so the worker accepts the records.
  const names = spec.features.map((f) => f.name);
  const rows: FitRow[] = derivedByCli.map((row, i) => ({ values: Float64Array.from(names.map((n) => Number(row[n]))), segment: ledger[i].channel }));
  const { artifact } = await fitModel(
    {
      async *pass() {
        yield* rows;
      },
    },
    {
      features: spec.features,
      recordSpec: spec,
      shape: "full",
      estimator: "classical",
      segmentBy: "channel",
      cutoffRate: 0.02,
      version: "mparity-demo",
      createdAt: "2026-12-01T00:00:00.000Z",
    },
  );
  worker = await startWorker({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0", PAYMENT_CLOCK_TOLERANCE_SECONDS: "0" } });
  await publishModel(worker, artifact);
}, 120_000);

afterAll(async () => {
  await worker?.dispose();
  await rm(dir, { recursive: true, force: true });
});

/** Rows replayed: the ledger's first 600 (about 8 days of the shop) in quick runs, all 2,000 in thorough ones. */
const REPLAYED = byTestDepth({ quick: 600, thorough: Number.POSITIVE_INFINITY });

test("replaying the demo ledger's records through the worker in time order derives what isodense derive writes, for every row and feature", { timeout: 300_000 }, async () => {
  const names = spec.features.map((f) => f.name);
  const replayed = ledger.slice(0, REPLAYED);
  // Only the columns the model reads: the ledger's label never leaves the shop.
  const columns = recordColumns(spec).filter((c) => c !== spec.record!.id);
  expect(columns).not.toContain("label");
  const derived: Record<string, number>[] = [];
  // Batches as scripts/replay.ts sends them: up to 100 payments naming at most 25 accounts (MAX_BATCH_ACCOUNTS).
  const batches: (typeof replayed)[] = [[]];
  let accounts = new Set<string>();
  for (const row of replayed) {
    const account = String(row[spec.record!.account]);
    if (batches[batches.length - 1].length === 100 || (!accounts.has(account) && accounts.size === 25)) {
      batches.push([]);
      accounts = new Set();
    }
    accounts.add(account);
    batches[batches.length - 1].push(row);
  }
  let start = 0;
  for (const rows of batches) {
    const payments = rows.map((row) => ({
      transactionId: row.paymentId,
      payment: Object.fromEntries(columns.map((c) => [c, row[c]])),
    }));
    const response = await worker.post("/v1/score/batch", { payments }, worker.tokens.flow);
    expect(response.status).toBe(200);
    const body = (await response.json()) as { results: { index: number; outcome: string; result?: { derived: Record<string, number> } }[] };
    for (const r of body.results) {
      if (r.outcome !== "scored") throw new Error(`row ${start + r.index} was refused: ${JSON.stringify(r)}`);
      derived.push(r.result!.derived);
    }
    start += rows.length;
  }
  expect(derived).toHaveLength(replayed.length);
  let worst = 0;
  let worstAt = "";
  derived.forEach((d, i) => {
    for (const name of names) {
      const expected = Number(derivedByCli[i][name]);
      const relative = Math.abs(d[name] - expected) / Math.max(Math.abs(expected), Number.MIN_VALUE);
      if (relative > worst) [worst, worstAt] = [relative, `row ${i + 1} ${name}: worker ${d[name]}, derive ${expected}`];
    }
  });
  expect(worst, worstAt).toBeLessThanOrEqual(1e-12);
  // The history features were exercised: repeat customers within a day, and a spread of gaps.
  expect(derived.filter((d) => d.paymentsLast24h > 0).length).toBeGreaterThan(10);
  expect(new Set(derived.map((d) => d.hoursSincePrevious)).size).toBeGreaterThan(replayed.length / 3);
});
