/**
 * The loop on the demo, step by step against a running service (`npm start`): decisions → label
 * export → `isodense tune` → `isodense refit` → `isodense publish` → live. Each step runs the real
 * route or CLI command and its output is passed on; the figures come back for docs/loop.md.
 *
 * The decisions step stands in for the analysts: it decides the open review items from the demo
 * ledger's own labels (scripts/demo-decisions.ts). Demo only — real labels come from people.
 */
import { readFileSync } from "node:fs";
import { writeFile } from "node:fs/promises";
import { join } from "node:path";
import { publishCommand } from "../cli/commands/publish";
import { refitCommand } from "../cli/commands/refit";
import { tuneCommand } from "../cli/commands/tune";
import type { CommandIO } from "../cli/io";
import type { ModelArtifact } from "../shared-model/src/artifact";
import { decideFromLedger } from "./demo-decisions";

/** Where the service is and who calls it. */
export interface DemoLoopOptions {
  url: string;
  adminToken: string;
  analystToken: string;
  /** The demo ledger CSV (paymentId, …, label): the labels of the decisions and the refit window. */
  ledgerPath: string;
  /** Folder for labels.csv, live.json, tuned.json and candidate.json. */
  workDir: string;
  /** Where each step's output goes. */
  write: (text: string) => void;
}

/** What the walkthrough reports. */
export interface DemoLoopFigures {
  liveVersion: string;
  decided: { fraud: number; legitimate: number };
  labelRows: number;
  tunedVersion: string;
  tunedCutoff: number;
  candidateVersion: string;
  candidateExcludedAsFraud: number;
  liveAfter: string;
}

/** A step failed; the message names the step and carries its output. */
export class DemoLoopError extends Error {
  constructor(step: string, detail: string) {
    super(`${step}: ${detail}`);
    this.name = "DemoLoopError";
  }
}

/**
 * Runs the loop once and returns its figures.
 *
 * @throws {DemoLoopError} naming the step that failed (no live model, a refused call, a CLI exit ≠ 0).
 * @example
 * await runDemoLoop({ url: "http://127.0.0.1:8787", adminToken, analystToken, ledgerPath, workDir, write: (t) => process.stdout.write(t) });
 */
export async function runDemoLoop(o: DemoLoopOptions): Promise<DemoLoopFigures> {
  const health = await getJson<{ model: { version: string } | null }>(o, "/v1/health", null, "health", [200, 503]);
  if (!health.model) throw new DemoLoopError("health", "no model is live; start the service with `npm start` first");
  const liveVersion = health.model.version;
  o.write(`1. live model ${liveVersion}\n`);

  const labels = ledgerLabels(o.ledgerPath);
  const decided = await decideFromLedger(o.url, o.analystToken, (id) => labels.get(id));
  o.write(`2. decisions: ${decided.fraud} confirmed fraud, ${decided.legitimate} legitimate (from the demo ledger's labels)\n`);

  const exportRes = await fetch(`${o.url}/v1/review/export?format=csv`, { headers: { authorization: `Bearer ${o.analystToken}` } });
  const csv = await exportRes.text();
  if (exportRes.status !== 200) throw new DemoLoopError("export", `GET /v1/review/export answered ${exportRes.status}: ${csv.slice(0, 300)}`);
  const labelsPath = join(o.workDir, "labels.csv");
  await writeFile(labelsPath, csv);
  const labelRows = csv.trim().split("\n").length - 1;
  o.write(`3. label export: ${labelRows} labelled payments → ${labelsPath}\n`);

  const stored = await getJson<{ artifact: ModelArtifact }>(o, `/v1/models/${encodeURIComponent(liveVersion)}`, o.adminToken, "live model");
  const livePath = join(o.workDir, "live.json");
  await writeFile(livePath, JSON.stringify(stored.artifact, null, 2));

  const tunedPath = join(o.workDir, "tuned.json");
  await cli(o, "4. isodense tune", () => tuneCommand([labelsPath, "--model", livePath, "--out", tunedPath, "--objective", "f1"], io(o)));
  const tuned = JSON.parse(readFileSync(tunedPath, "utf8")) as ModelArtifact;

  const candidatePath = join(o.workDir, "candidate.json");
  await cli(o, "5. isodense refit", () => refitCommand([o.ledgerPath, "--labels", labelsPath, "--model", livePath, "--out", candidatePath, "--id-column", "paymentId"], io(o)));
  const candidate = JSON.parse(readFileSync(candidatePath, "utf8")) as ModelArtifact;

  await cli(o, "6. isodense publish", () => publishCommand([candidatePath, "--url", o.url, "--token", o.adminToken, "--activate"], io(o)));
  const after = await getJson<{ model: { version: string } | null }>(o, "/v1/health", null, "health", [200, 503]);
  const liveAfter = after.model?.version ?? "(none)";
  o.write(`7. live now: ${liveAfter}\n`);
  return {
    liveVersion,
    decided,
    labelRows,
    tunedVersion: tuned.version,
    tunedCutoff: tuned.cutoff.mahalanobisSq,
    candidateVersion: candidate.version,
    candidateExcludedAsFraud: candidate.training.rowsExcludedAsFraud,
    liveAfter,
  };
}

/** The ledger's label per payment id (columns `paymentId` and `label`). */
export function ledgerLabels(path: string): Map<string, "fraud" | "legitimate"> {
  const lines = readFileSync(path, "utf8").split("\n");
  const header = lines[0].split(",");
  const idAt = header.indexOf("paymentId");
  const labelAt = header.indexOf("label");
  if (idAt < 0 || labelAt < 0) throw new DemoLoopError("ledger", `${path} must have paymentId and label columns`);
  const labels = new Map<string, "fraud" | "legitimate">();
  for (let i = 1; i < lines.length; i++) {
    if (!lines[i]) continue;
    const cells = lines[i].split(",");
    const label = cells[labelAt];
    if (label === "fraud" || label === "legitimate") labels.set(cells[idAt], label);
  }
  return labels;
}

async function getJson<T>(o: DemoLoopOptions, path: string, token: string | null, step: string, ok: number[] = [200]): Promise<T> {
  const res = await fetch(`${o.url}${path}`, { headers: token ? { authorization: `Bearer ${token}` } : {} });
  const text = await res.text();
  if (!ok.includes(res.status)) throw new DemoLoopError(step, `GET ${path} answered ${res.status}: ${text.slice(0, 300)}`);
  return JSON.parse(text) as T;
}

function io(o: DemoLoopOptions): CommandIO {
  return { stdout: { write: (t: string) => o.write(indent(t)) }, stderr: { isTTY: false, write: (t: string) => o.write(indent(t)) } };
}

async function cli(o: DemoLoopOptions, step: string, run: () => Promise<number>): Promise<void> {
  o.write(`${step}\n`);
  const code = await run();
  if (code !== 0) throw new DemoLoopError(step, `exited ${code} (its output is above)`);
}

function indent(text: string): string {
  return text.replace(/^(?=.)/gm, "   ");
}
