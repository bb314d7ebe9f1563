/**
 * The loop on the demo against a running service (`npm start`): decisions → `isodense renew` (label
 * export, refit on the window, backtest, gate, shadow) → the live/shadow comparison. Each step runs
 * the real route or CLI command and its output is passed on; the figures come back for docs/loop.md.
 * Promoting the shadow stays with a person: the model page, or the activate route.
 *
 * The decisions step stands in for the analysts: it decides the open review items from the demo
 * ledger's own labels (scripts/demo-decisions.ts). Demo only — real labels come from people.
 */
import { readFileSync } from "node:fs";
import { join } from "node:path";
import { renewCommand } from "../cli/commands/renew";
import type { CommandIO } from "../cli/io";
import type { RenewReport } from "../shared-model/src/renew-report";
import type { ShadowData } from "../worker/src/contract";
import { decideFromLedger } from "./demo-decisions";

/** Where the service is and who calls it. */
export interface DemoLoopOptions {
  url: string;
  adminToken: string;
  analystToken: string;
  /** The demo ledger CSV (paymentId, …, label): the labels of the decisions and the refit window. */
  ledgerPath: string;
  /** Folder renew keeps its files in (labels.csv, live.json, the candidate and its report). */
  workDir: string;
  /** More words for `isodense renew` (e.g. `--window 14d`). */
  renewArgs?: string[];
  /** Where each step's output goes. */
  write: (text: string) => void;
}

/** What the walkthrough reports. */
export interface DemoLoopFigures {
  liveVersion: string;
  decided: { fraud: number; legitimate: number };
  /** renew's exit code (0 published or unchanged, 1 held back) and its report. */
  renewExit: number;
  report: RenewReport;
  /** The shadow after the run (the candidate when it was published). */
  shadowAfter: string | null;
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

  const reportPath = join(o.workDir, "renew-report.json");
  const args = ["--ledger", o.ledgerPath, "--url", o.url, "--token", o.adminToken, "--keep", o.workDir, "--report", reportPath, ...(o.renewArgs ?? [])];
  o.write(`3. isodense renew ${args.map((a) => (a === o.adminToken ? "$ISODENSE_ADMIN_TOKEN" : a)).join(" ")}\n`);
  const renewExit = await renewCommand(args, io(o));
  if (renewExit !== 0 && renewExit !== 1) throw new DemoLoopError("3. isodense renew", `exited ${renewExit} (its output is above)`);
  const report = JSON.parse(readFileSync(reportPath, "utf8")) as RenewReport;

  const shadow = await getJson<ShadowData>(o, "/v1/insights/shadow", o.analystToken, "shadow");
  o.write(`4. shadow now: ${shadow.pointer.shadow ?? "(none)"}; promote it on the model page (#/model) once its agreement with live has been read, ` + `or discard it there\n`);
  return { liveVersion, decided, renewExit, report, shadowAfter: shadow.pointer.shadow };
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

function indent(text: string): string {
  return text.replace(/^(?=.)/gm, "   ");
}
