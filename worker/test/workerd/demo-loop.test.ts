/**
 * The loop on the demo, as `npm run demo:loop` runs it, against the real worker listening on
 * 127.0.0.1 (Miniflare's HTTP server, real local KV, D1 and Queues): week 1's model is fitted,
 * published and fed later payments (test/e2e/demo-queue.ts); the analysts' decisions come from the
 * ledger's labels; then `isodense renew` refits on a drifted week-2 ledger of the real generator
 * (prices a fifth higher), the candidate becomes the shadow, traffic reaches both models, an admin
 * promotes it and a rollback restores week 1. A second case shows the gate holding back a worse
 * candidate: one fitted with the confirmed fraud left in; a third, a fit refused for too few rows,
 * which still leaves its report.
 */
import { mkdtemp, readdir, readFile, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, expect, test } from "vitest";
import { renewCommand } from "../../../cli/commands/renew";
import { captureIO } from "../../../cli/capture-io";
import { demoLedgerCommand } from "../../../demo-ledger/cli";
import { generateLedger } from "../../../demo-ledger/generate";
import { runDemoLoop } from "../../../scripts/demo-loop-core";
import { renewRefusedReportSchema, type RenewReport } from "../../../shared-model/src/renew-report";
import { seedDemoQueue } from "../../../test/e2e/demo-queue";
import type { ModelPageData, ShadowData } from "../../src/contract";
import { startWorker, type RunningWorker } from "../harness";

const ROWS = 6000;
/** Week 2 turns dearer from here on: the last three weeks of the eight the generator spans. */
const RISE_FROM = "2026-11-05";
let worker: RunningWorker;
let url: string;
let dir: string;
let driftedPath: string;
let seeded: { version: string; flagged: number };

beforeAll(async () => {
  worker = await startWorker({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0.02" } });
  url = (await worker.mf.ready).origin;
  dir = await mkdtemp(join(tmpdir(), "isodense-loop-"));
  driftedPath = join(dir, "week2.csv");
  const write = process.stdout.write;
  process.stdout.write = (() => true) as typeof process.stdout.write; // the generator prints a summary
  try {
    expect(await demoLedgerCommand(["--out", driftedPath, "--rows", String(ROWS), "--price-rise", "0.2", "--rise-from", RISE_FROM])).toBe(0);
  } finally {
    process.stdout.write = write;
  }
  seeded = await seedDemoQueue(url, { admin: worker.tokens.admin, flow: worker.tokens.flow, analyst: worker.tokens.analyst }, { rows: ROWS });
}, 180_000);
afterAll(async () => {
  await worker?.dispose();
  await rm(dir, { recursive: true, force: true });
});

async function getJson<T>(path: string, token: string): Promise<T> {
  const res = await worker.fetch(path, { headers: { authorization: `Bearer ${token}` } });
  expect(res.status, await res.clone().text()).toBe(200);
  return (await res.json()) as T;
}

async function post(path: string, body: unknown = {}): Promise<Response> {
  return worker.fetch(path, { method: "POST", headers: { authorization: `Bearer ${worker.tokens.admin}`, "content-type": "application/json" }, body: JSON.stringify(body) });
}

async function liveVersion(): Promise<string> {
  return ((await (await worker.fetch("/v1/health")).json()) as { model: { version: string } }).model.version;
}

test("renew publishes the drifted week's candidate as the shadow; traffic reaches both; an admin promotes it and a rollback restores week 1", async () => {
  let output = "";
  const workDir = join(dir, "run");
  const figures = await runDemoLoop({
    url,
    adminToken: worker.tokens.admin,
    analystToken: worker.tokens.analyst,
    ledgerPath: driftedPath,
    workDir,
    write: (t) => (output += t),
  }).catch((error: unknown) => {
    throw new Error(`${String(error)}\n${output}`);
  });
  expect(figures.liveVersion).toBe(seeded.version);
  expect(figures.decided.fraud + figures.decided.legitimate).toBe(seeded.flagged);
  const { report } = figures;
  expect(figures.renewExit, output).toBe(0);
  expect(report.outcome).toBe("published");
  expect(report.gate.passed).toBe(true);
  expect(figures.shadowAfter).toBe(report.candidateVersion);
  // The window is the last 28 days of the ledger, and the confirmed fraud was left out of it.
  expect(report.window.days).toBe(28);
  expect(report.ledger.rowsInWindow).toBeLessThan(report.ledger.rowsRead);
  expect(report.ledger.confirmedFraudLeftOut + report.ledger.ledgerFraudLeftOut).toBeGreaterThan(0);
  expect(report.ledger.dismissedKept).toBeGreaterThan(0);
  // The price rise shows in the drift of the window against week 1's training traffic: an amount
  // against the account's earlier average moves first.
  expect(report.drift.find((d) => d.name === "amountVsAccountAverage")?.level).not.toBe("stable");
  for (const step of ["1. live model", "2. decisions", "3. isodense renew", "published", "4. shadow now"]) expect(output).toContain(step);

  // Safe to run twice: the identical candidate is already the shadow, so nothing is sent.
  const again = captureIO();
  expect(await renewCommand(["--ledger", driftedPath, "--url", url, "--token", worker.tokens.admin, "--keep", workDir], again.io)).toBe(0);
  expect(again.out()).toContain(`${report.candidateVersion} is already the shadow; nothing published`);

  // The model page shows the shadow with its renew report.
  const page = await getJson<ModelPageData>("/v1/insights/model", worker.tokens.analyst);
  expect(page.shadow?.version).toBe(report.candidateVersion);
  expect(page.renew.shadow?.report.candidateVersion).toBe(report.candidateVersion);
  expect(page.shadowSince).not.toBeNull();

  // Scored traffic reaches both models: fresh payments of week 2, scored by live and shadow.
  const week2 = [...generateLedger({ rows: ROWS, priceRise: { from: RISE_FROM, rise: 0.2 } })].slice(-300);
  const payments = week2.map((r) => ({
    transactionId: `w2-${r.paymentId}`,
    features: Object.fromEntries(page.active.features.map((f) => [f.name, r[f.name as keyof typeof r] as number])),
    segment: r.channel,
  }));
  for (let start = 0; start < payments.length; start += 100) {
    const res = await worker.fetch("/v1/score/batch", {
      method: "POST",
      headers: { authorization: `Bearer ${worker.tokens.flow}`, "content-type": "application/json" },
      body: JSON.stringify({ payments: payments.slice(start, start + 100) }),
    });
    expect(res.status, await res.clone().text()).toBe(200);
  }
  let shadow: ShadowData | null = null;
  for (const deadline = Date.now() + 60_000; Date.now() < deadline; await new Promise((r) => setTimeout(r, 250))) {
    shadow = await getJson<ShadowData>("/v1/insights/shadow", worker.tokens.analyst);
    if ((shadow.comparison?.payments ?? 0) >= payments.length) break;
  }
  expect(shadow?.comparison?.payments).toBe(payments.length);
  expect(shadow?.comparison?.shadowVersion).toBe(report.candidateVersion);
  const disagreeing = (shadow?.comparison?.liveFlags ?? 0) + (shadow?.comparison?.shadowFlags ?? 0) - 2 * (shadow?.comparison?.bothFlags ?? 0);
  expect(shadow?.disagreements.length).toBe(Math.min(20, disagreeing));

  // An admin promotes the shadow (the audited activate), then rolls back to week 1.
  expect((await post(`/v1/models/${report.candidateVersion}/activate`)).status).toBe(200);
  expect(await liveVersion()).toBe(report.candidateVersion);
  expect((await post("/v1/models/rollback")).status).toBe(200);
  expect(await liveVersion()).toBe(seeded.version);
  const events = (await getJson<ModelPageData>("/v1/insights/model", worker.tokens.analyst)).events.map((e) => [e.action, e.toVersion]);
  expect(events.slice(0, 3)).toEqual([
    ["rollback", seeded.version],
    ["activate", report.candidateVersion],
    ["shadow-set", report.candidateVersion],
  ]);
}, 240_000);

test("the gate holds back a candidate fitted with the confirmed fraud left in, says why, and keeps it for a person", async () => {
  // The same week-2 ledger with its labels blanked and its ids renamed, so neither the ledger nor
  // the labelled set can tell the fit which payments were fraud.
  const lines = (await readFile(driftedPath, "utf8")).trimEnd().split("\n");
  const header = lines[0].split(",");
  const idAt = header.indexOf("paymentId");
  const labelAt = header.indexOf("label");
  const blind = lines.map((line, i) => {
    if (i === 0) return line;
    const cells = line.split(",");
    cells[idAt] = `blind-${cells[idAt]}`;
    cells[labelAt] = "";
    return cells.join(",");
  });
  const blindPath = join(dir, "week2-blind.csv");
  await writeFile(blindPath, `${blind.join("\n")}\n`);
  const reportPath = join(dir, "held.json");
  const run = captureIO();
  const code = await renewCommand(["--ledger", blindPath, "--url", url, "--token", worker.tokens.admin, "--keep", join(dir, "held"), "--report", reportPath], run.io);
  expect(code, run.out() + run.err()).toBe(1);
  const report = JSON.parse(await readFile(reportPath, "utf8")) as RenewReport;
  expect(report.outcome).toBe("held");
  expect(report.ledger.confirmedFraudLeftOut + report.ledger.ledgerFraudLeftOut).toBe(0);
  const failed = report.gate.checks.filter((c) => !c.passed).map((c) => c.name);
  // The fraud widened the covariance it was meant to stand out from: a worse ranking of the labels.
  expect(failed).toContain("pr-auc");
  expect(report.candidate.prAuc).toBeLessThan(report.live.prAuc - report.gate.thresholds.maxPrAucDrop);
  expect(report.reasons.length).toBe(failed.length);
  expect(run.out()).toContain(`held back ${report.candidateVersion}`);
  for (const reason of report.reasons) expect(run.out()).toContain(reason.split(":")[0]);
  // Not scoring, but stored with its report for a person to read on the model page.
  const page = await getJson<ModelPageData>("/v1/insights/model", worker.tokens.analyst);
  expect(page.pointer.shadow).not.toBe(report.candidateVersion);
  expect(page.pointer.version).not.toBe(report.candidateVersion);
  expect(page.renew.held?.report.candidateVersion).toBe(report.candidateVersion);
  expect((await worker.fetch(`/v1/models/${report.candidateVersion}`, { headers: { authorization: `Bearer ${worker.tokens.admin}` } })).status).toBe(200);
}, 240_000);

test("a candidate whose fit is refused still leaves a JSON report, naming the check that refused, its message and the exit code", async () => {
  // The latest five payments of week 2 alone: too few rows in the window for nine features.
  const lines = (await readFile(driftedPath, "utf8")).trimEnd().split("\n");
  const fewPath = join(dir, "week2-few.csv");
  await writeFile(fewPath, `${[lines[0], ...lines.slice(-5)].join("\n")}\n`);
  const reportPath = join(dir, "refused.json");
  const keep = join(dir, "refused");
  const shadowBefore = (await getJson<ModelPageData>("/v1/insights/model", worker.tokens.analyst)).pointer.shadow;
  const run = captureIO();
  const code = await renewCommand(["--ledger", fewPath, "--url", url, "--token", worker.tokens.admin, "--keep", keep, "--report", reportPath], run.io);
  expect(code, run.out() + run.err()).toBe(1);
  expect(run.err()).toContain("isodense renew: fit refused");
  const report = renewRefusedReportSchema.parse(JSON.parse(await readFile(reportPath, "utf8")));
  expect(report.outcome).toBe("refused");
  expect(report.refusal.check).toBe("too-few-rows");
  expect(report.refusal.exitCode).toBe(1);
  expect(run.err()).toContain(report.refusal.message);
  expect(report.reasons[0]).toBe(`too-few-rows: ${report.refusal.message}`);
  expect(report.liveVersion).toBe(await liveVersion());
  expect(report.shadowBefore).toBe(shadowBefore);
  expect(report.ledger.rowsRead).toBe(5);
  expect(report.labels.fraud).toBeGreaterThan(0);
  // The same report is kept beside the labels and the live model.
  const kept = (await readdir(keep)).filter((name) => name.startsWith("renew-refused-"));
  expect(kept).toHaveLength(1);
  expect(JSON.parse(await readFile(join(keep, kept[0]), "utf8"))).toEqual(report);
  // Nothing reached the service: the shadow is as it was.
  expect((await getJson<ModelPageData>("/v1/insights/model", worker.tokens.analyst)).pointer.shadow).toBe(shadowBefore);
}, 120_000);
