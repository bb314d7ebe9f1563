/**
 * `isodense renew --ledger SOURCE --url URL --token T`: the weekly refit as one command for a
 * scheduler. Reads the live model (and its spec) and the labelled set from the service, refits on
 * the latest window of the ledger with `refitCandidate` (confirmed fraud left out, dismissed flags
 * kept), backtests candidate against live, applies the safety gate, and publishes a passing
 * candidate as the shadow. Promotion stays with a person (the model page). A held-back candidate
 * is stored on the service, not scoring, with its report. Running it twice on the same data
 * publishes nothing new: the candidate's version names its content and its window.
 */
import { mkdir, writeFile } from "node:fs/promises";
import { join, resolve } from "node:path";
import { parseArtifact, type ModelArtifact } from "../../shared-model/src/artifact";
import { parseDuration } from "../../shared-model/src/records/time";
import type { RenewOutcome, RenewReport, RenewRunReport } from "../../shared-model/src/renew-report";
import { formatHelp, numberOption, parseArgs, stringOption, UsageError, type CommandSpec } from "../args";
import { EXIT_INTERNAL, EXIT_OK, EXIT_REFUSED, reportFailure } from "../errors";
import { checkOutputPath, writeFileAtomic } from "../files";
import { processIO, writeLines, type CommandIO } from "../io";
import { parseIsoTime } from "../ledger";
import { createProgress } from "../progress";
import { applyGate, DEFAULT_GATE, type GateThresholds } from "../renew/gate";
import { buildRefusedReport, buildReport, reportFileName, reportLines } from "../renew/report";
import { callService, refusal, serviceToken, serviceUrl, TOKEN_ENV, UnreachableError, type ServiceTarget } from "../service/client";
import { SOURCE_KINDS_TEXT, SOURCE_OPTIONS, sourceFromArgs } from "../sources/source";
import { RefitRefusal, refitCandidate, type RefitOutcome } from "./refit";

/** Exit code: the candidate was held back by the gate (or its fit refused by diagnostics). */
export const EXIT_HELD_BACK = EXIT_REFUSED;

/** Default training window. */
export const DEFAULT_WINDOW = "28d";

/** Command line of `isodense renew`. */
export const renewSpec: CommandSpec = {
  command: "isodense renew",
  summary:
    "The weekly refit for a scheduler: reads the live model and the labelled set from the service, refits on the latest window of the " +
    "ledger (confirmed fraud left out, dismissed flags kept), backtests candidate against live on the labels, applies the safety gate " +
    "and publishes a passing candidate as the shadow model. Promoting it stays with a person (the model page).",
  positionals: [],
  options: [
    {
      name: "ledger",
      kind: "string",
      valueName: "source",
      description: `payments (records or feature columns) covering the window, with an id and a time column: ${SOURCE_KINDS_TEXT} (required)`,
    },
    ...SOURCE_OPTIONS,
    { name: "url", kind: "string", valueName: "url", description: "base URL of the service, e.g. http://127.0.0.1:8787 (required)" },
    { name: "token", kind: "string", valueName: "token", description: "admin bearer token", defaultText: `$${TOKEN_ENV}` },
    { name: "window", kind: "string", valueName: "length", description: "training window ending at the latest payment: 28d, 14d, 36h", defaultText: DEFAULT_WINDOW },
    { name: "until", kind: "string", valueName: "time", description: "end of the window, ISO-8601 with a zone", defaultText: "the ledger's latest payment" },
    { name: "report", kind: "string", valueName: "report.json", description: "also write the JSON report here" },
    { name: "keep", kind: "string", valueName: "folder", description: "where the labels, the live model, the candidate and each report are kept", defaultText: "isodense-renew" },
    {
      name: "max-pr-auc-drop",
      kind: "number",
      valueName: "d",
      min: 0,
      max: 1,
      description: "gate: largest drop of PR-AUC on the labels, candidate against live",
      defaultText: String(DEFAULT_GATE.maxPrAucDrop),
    },
    {
      name: "max-recall-drop",
      kind: "number",
      valueName: "d",
      min: 0,
      max: 1,
      description: "gate: largest drop of recall at the live flag rate",
      defaultText: `${DEFAULT_GATE.maxRecallDrop} (not lower)`,
    },
    {
      name: "flag-rate-band",
      kind: "string",
      valueName: "low,high",
      description: "gate: the candidate's flag rate on the latest week, as multiples of the rate its cutoff was set for",
      defaultText: DEFAULT_GATE.flagRateBand.join(","),
    },
    { name: "id-column", kind: "string", valueName: "column", description: "payment id column of the ledger", defaultText: "the record spec's id, else id" },
    { name: "time-column", kind: "string", valueName: "column", description: "payment time column of a feature ledger", defaultText: "the record spec's time" },
    { name: "label-column", kind: "string", valueName: "column", description: "label column of the ledger (fraud rows are left out)", defaultText: "label if present" },
    { name: "seed", kind: "integer", valueName: "N", min: 0, max: 2 ** 32 - 1, description: "seed for sampling and the robust fit", defaultText: "the live model's" },
  ],
  notes: [
    "Exit codes: 0 published as the shadow, or nothing new to publish (the same candidate is already the shadow or live);",
    "1 held back by the gate (each failed check printed; the candidate is stored on the service, not scoring, with its report)",
    "or the fit refused by diagnostics (the report, outcome refused, names the check); 2 usage or input error (including a refusal by the service: token, no live model);",
    "3 the service could not be reached or answered unexpectedly.",
    "Drift of the window against the live model's training traffic is reported, not gated. Promote or discard the shadow on the model page.",
  ],
};

/**
 * Runs `isodense renew` with the words after `renew`.
 * @returns the exit code (0 published or unchanged, 1 held back, 2 input error, 3 unreachable/internal)
 * @example await renewCommand(["--ledger", "ledger.csv", "--url", "http://127.0.0.1:8787", "--token", token])
 */
export async function renewCommand(argv: string[], io: CommandIO = processIO()): Promise<number> {
  const progress = createProgress(io.stderr);
  try {
    const args = parseArgs(argv, renewSpec);
    if (args.help) {
      io.stdout.write(formatHelp(renewSpec));
      return EXIT_OK;
    }
    const ledgerArg = stringOption(args, "ledger");
    if (ledgerArg === undefined) throw new UsageError("--ledger", "is required", "option --ledger is required: the payments of the training window");
    const ledger = sourceFromArgs(args, ledgerArg, "--ledger");
    const target: ServiceTarget = { base: serviceUrl(stringOption(args, "url")), token: serviceToken(stringOption(args, "token")) };
    const windowMs = parseWindow(stringOption(args, "window") ?? DEFAULT_WINDOW);
    const untilMs = parseUntil(stringOption(args, "until"));
    const thresholds = gateThresholds(args);
    const keep = resolve(stringOption(args, "keep") ?? "isodense-renew");
    await mkdir(keep, { recursive: true });
    const reportPath = stringOption(args, "report");
    if (reportPath !== undefined) await checkOutputPath(reportPath, "--report");

    const pointer = await readPointer(target);
    const live = await readLive(target, pointer.version);
    await writeFile(join(keep, "live.json"), `${JSON.stringify(live, null, 2)}\n`);
    const labelsPath = join(keep, "labels.csv");
    await writeFile(labelsPath, await readLabelExport(target));

    let refit: RefitOutcome;
    try {
      refit = await refitCandidate({
        ledger,
        labelsPath,
        live,
        labelColumns: {},
        idColumn: stringOption(args, "id-column"),
        labelColumn: stringOption(args, "label-column"),
        timeColumn: stringOption(args, "time-column"),
        seed: numberOption(args, "seed"),
        window: { lengthMs: windowMs, untilMs },
        onProgress: (pass, rows) => progress.update(pass, rows),
      });
    } catch (error) {
      if (!(error instanceof RefitRefusal)) throw error;
      // A scheduled job reads the report: a refused fit writes one too, naming the check that refused.
      progress.done();
      const exitCode = reportFailure(error, io, renewSpec.command);
      await writeReport(buildRefusedReport({ refusal: error, liveVersion: live.version, shadowBefore: pointer.shadow, exitCode, createdAt: new Date() }), keep, reportPath);
      return exitCode;
    }
    progress.done();
    const { candidate } = refit;
    const week = refit.ledger.latestWeek;
    const verdict = applyGate(
      {
        diagnostics: refit.fitReport.diagnostics,
        liveDiagnostics: live.diagnostics,
        live: { prAuc: refit.backtest.live.averagePrecision, recallAtLiveRate: refit.backtest.recallAtLiveRate.live },
        candidate: { prAuc: refit.backtest.candidate.averagePrecision, recallAtLiveRate: refit.backtest.recallAtLiveRate.candidate },
        latestWeek: { payments: week.payments, candidateFlagRate: week.payments > 0 ? week.candidate / week.payments : null, designedRate: candidate.cutoff.flagRate },
      },
      thresholds,
    );
    const unchanged = candidate.version === pointer.shadow || candidate.version === pointer.version;
    const outcome: RenewOutcome = unchanged ? "unchanged" : verdict.passed ? "published" : "held";
    const report = buildReport({ refit, verdict, thresholds, window: refit.window!, shadowBefore: pointer.shadow, outcome, createdAt: new Date() });
    await writeFile(join(keep, `${candidate.version}.json`), `${JSON.stringify(candidate, null, 2)}\n`);
    if (outcome !== "unchanged") await sendCandidate(target, candidate, report);
    await writeReport(report, keep, reportPath);
    writeLines(io.stdout, reportLines(report, refit));
    return outcome === "held" ? EXIT_HELD_BACK : EXIT_OK;
  } catch (error) {
    progress.done();
    if (error instanceof UnreachableError) {
      writeLines(io.stderr, [`isodense renew: ${error.message}`]);
      return EXIT_INTERNAL;
    }
    return reportFailure(error, io, renewSpec.command);
  }
}

/** Writes the JSON report into the keep folder and, when asked, to `--report`. */
async function writeReport(report: RenewRunReport, keep: string, reportPath: string | undefined): Promise<void> {
  const text = `${JSON.stringify(report, null, 2)}\n`;
  await writeFile(join(keep, reportFileName(report)), text);
  if (reportPath !== undefined) await writeFileAtomic(reportPath, text);
}

/**
 * Sends the candidate and its report: the artifact is stored (immutable, not live), a passing one
 * becomes the shadow, and the report is filed beside it for the model page.
 */
async function sendCandidate(target: ServiceTarget, candidate: ModelArtifact, report: RenewReport): Promise<void> {
  const upload = await callService(target, "POST", "/v1/models", candidate);
  if (upload.status !== 201 && upload.status !== 200) throw refusal("upload of the candidate", upload);
  const path = `/v1/models/${encodeURIComponent(candidate.version)}`;
  if (report.outcome === "published") {
    const shadow = await callService(target, "PUT", "/v1/models/shadow", { version: candidate.version });
    if (shadow.status !== 200) throw refusal("setting the shadow", shadow);
  }
  const filed = await callService(target, "POST", `${path}/renew-report`, report);
  if (filed.status !== 201 && filed.status !== 200) throw refusal("filing the renew report", filed);
}

async function readPointer(target: ServiceTarget): Promise<{ version: string; shadow: string | null }> {
  const answer = await callService(target, "GET", "/v1/insights/shadow");
  if (answer.status !== 200) throw refusal("reading the live model", answer);
  return (answer.body as { pointer: { version: string; shadow: string | null } }).pointer;
}

async function readLive(target: ServiceTarget, version: string): Promise<ModelArtifact> {
  const answer = await callService(target, "GET", `/v1/models/${encodeURIComponent(version)}`);
  if (answer.status !== 200) throw refusal("reading the live model", answer);
  return parseArtifact((answer.body as { artifact: unknown }).artifact);
}

async function readLabelExport(target: ServiceTarget): Promise<string> {
  const answer = await callService(target, "GET", "/v1/review/export?format=csv", undefined, { text: true });
  if (answer.status !== 200) throw refusal("the label export", answer);
  return answer.body as string;
}

function parseWindow(text: string): number {
  const ms = parseDuration(text);
  if (ms === null || ms < 86_400_000) {
    throw new UsageError("--window", "a duration of at least 1d", `option --window must be a duration of at least one day, such as 28d or 36h; got '${text}'`);
  }
  return ms;
}

function parseUntil(text: string | undefined): number | undefined {
  if (text === undefined) return undefined;
  const ms = parseIsoTime(text);
  if (!Number.isFinite(ms)) throw new UsageError("--until", "ISO-8601 time with a zone", `option --until must be a time such as 2026-11-30T00:00:00Z; got '${text}'`);
  return ms;
}

function gateThresholds(args: ReturnType<typeof parseArgs>): GateThresholds {
  const bandText = stringOption(args, "flag-rate-band");
  let band = DEFAULT_GATE.flagRateBand;
  if (bandText !== undefined) {
    const parts = bandText.split(",").map((p) => Number(p.trim()));
    if (parts.length !== 2 || !parts.every((p) => Number.isFinite(p) && p > 0) || parts[0] > parts[1]) {
      throw new UsageError("--flag-rate-band", "low,high", `option --flag-rate-band must be two positive numbers low,high with low ≤ high, such as 0.5,2; got '${bandText}'`);
    }
    band = [parts[0], parts[1]];
  }
  return {
    maxPrAucDrop: numberOption(args, "max-pr-auc-drop") ?? DEFAULT_GATE.maxPrAucDrop,
    maxRecallDrop: numberOption(args, "max-recall-drop") ?? DEFAULT_GATE.maxRecallDrop,
    flagRateBand: band,
  };
}
