/**
 * The whole loop on the demo, as `npm run demo:loop` runs it, against the real worker listening on
 * 127.0.0.1 (Miniflare's HTTP server, real local KV, D1 and Queues): a smaller demo ledger is
 * written by the real generator, the demo model is fitted, published and fed the later payments
 * (test/e2e/demo-queue.ts), then decisions → label export → tune → refit → publish → live.
 */
import { mkdtemp, readFile, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, expect, test } from "vitest";
import { demoLedgerCommand } from "../../demo-ledger/cli";
import { runDemoLoop } from "../../scripts/demo-loop-core";
import { parseArtifact } from "../../shared-model/src";
import { seedDemoQueue } from "../../test/e2e/demo-queue";
import { startWorker, type RunningWorker } from "./harness";

const ROWS = 6000;
let worker: RunningWorker;
let url: string;
let dir: string;
let ledgerPath: string;
let seeded: { version: string; flagged: number };

beforeAll(async () => {
  worker = await startWorker({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0.02" } });
  url = (await worker.mf.ready).origin;
  dir = await mkdtemp(join(tmpdir(), "isodense-loop-"));
  ledgerPath = join(dir, "ledger.csv");
  const write = process.stdout.write;
  process.stdout.write = (() => true) as typeof process.stdout.write; // the generator prints a summary
  try {
    expect(await demoLedgerCommand(["--out", ledgerPath, "--rows", String(ROWS)])).toBe(0);
  } finally {
    process.stdout.write = write;
  }
  seeded = await seedDemoQueue(url, { admin: worker.tokens.admin, flow: worker.tokens.flow, analyst: worker.tokens.analyst }, { rows: ROWS });
}, 180_000);
afterAll(async () => {
  await worker?.dispose();
  await rm(dir, { recursive: true, force: true });
});

test("runs decisions, label export, tune, refit and publish, and the refitted candidate goes live", async () => {
  let output = "";
  const figures = await runDemoLoop({ url, adminToken: worker.tokens.admin, analystToken: worker.tokens.analyst, ledgerPath, workDir: dir, write: (t) => (output += t) });
  expect(figures.liveVersion).toBe(seeded.version);
  // Every flag and audit draw was decided from the ledger's labels, and all of them were exported.
  expect(figures.decided.fraud + figures.decided.legitimate).toBe(seeded.flagged);
  expect(figures.decided.fraud).toBeGreaterThan(0);
  expect(figures.labelRows).toBe(seeded.flagged);
  // The tuned version verifies and differs from the live one only by its cutoff.
  const live = await parseArtifact(await readFile(join(dir, "live.json"), "utf8"));
  const tuned = await parseArtifact(await readFile(join(dir, "tuned.json"), "utf8"));
  expect(tuned.version).not.toBe(live.version);
  expect(tuned.segments).toEqual(live.segments);
  expect(tuned.cutoff.basis).toBe("f1");
  // The refit left out at least every confirmed fraud, and the candidate is what scores now.
  const candidate = await parseArtifact(await readFile(join(dir, "candidate.json"), "utf8"));
  expect(candidate.training.rowsExcludedAsFraud).toBeGreaterThanOrEqual(figures.decided.fraud);
  expect(figures.liveAfter).toBe(candidate.version);
  const health = (await (await worker.fetch("/v1/health")).json()) as { model: { version: string } };
  expect(health.model.version).toBe(candidate.version);
  for (const step of ["1. live model", "2. decisions", "3. label export", "4. isodense tune", "5. isodense refit", "6. isodense publish", "7. live now"]) {
    expect(output).toContain(step);
  }
}, 180_000);
