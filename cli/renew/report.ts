/**
 * The renew report: built from the refit's outcome and the gate's verdict (the JSON that is kept
 * and sent to the service), and its short form for people.
 */
import { RENEW_REPORT_FORMAT, type RenewOutcome, type RenewRefusedReport, type RenewReport, type RenewRunReport } from "../../shared-model/src/renew-report";
import type { Diagnostic } from "../../shared-model/src/types";
import { formatCount, formatForPeople } from "../numbers";
import { jaccard, LATEST_WEEK_MS, type RefitCounts, type RefitOutcome, type RefitRefusal, type TimeWindow } from "../commands/refit";
import type { GateThresholds, GateVerdict } from "./gate";

/** Everything a report is made from. */
export interface ReportInputs {
  refit: RefitOutcome;
  verdict: GateVerdict;
  thresholds: GateThresholds;
  window: TimeWindow;
  shadowBefore: string | null;
  outcome: RenewOutcome;
  createdAt: Date;
}

/**
 * The report of one run.
 * @example const report = buildReport({ refit, verdict, thresholds, window, shadowBefore: null, outcome: "published", createdAt: new Date() });
 */
export function buildReport(inputs: ReportInputs): RenewReport {
  const { refit, verdict, thresholds, window } = inputs;
  const { live, candidate, backtest, counts, labels, ledger } = refit;
  const week = ledger.latestWeek;
  const figures = (model: typeof live, table: typeof backtest.live, recall: number, flags: number) => ({
    version: model.version,
    prAuc: table.averagePrecision,
    recallAtLiveRate: recall,
    cutoffMahalanobisSq: model.cutoff.mahalanobisSq,
    latestWeekFlagRate: week.payments > 0 ? flags / week.payments : null,
  });
  return {
    format: RENEW_REPORT_FORMAT,
    createdAt: inputs.createdAt.toISOString(),
    outcome: inputs.outcome,
    reasons: inputs.outcome === "held" ? verdict.checks.filter((c) => !c.passed).map((c) => `${c.rule}: ${c.found}`) : [],
    liveVersion: live.version,
    candidateVersion: candidate.version,
    shadowBefore: inputs.shadowBefore,
    window: windowPart(window),
    ledger: ledgerPart(candidate.training.source ?? "", counts),
    labels: { rows: labels.rows, fraud: labels.fraudCount },
    live: figures(live, backtest.live, backtest.recallAtLiveRate.live, week.live),
    candidate: figures(candidate, backtest.candidate, backtest.recallAtLiveRate.candidate, week.candidate),
    liveFlagRateOnLabels: backtest.liveFlagRate,
    latestWeek: { from: iso(Math.max(window.fromMs, window.toMs - LATEST_WEEK_MS)), to: iso(window.toMs), payments: week.payments },
    overlap: ledger.overlap,
    gate: { passed: verdict.passed, thresholds, checks: verdict.checks },
    diagnostics: diagnosticsPart(refit.fitReport.diagnostics),
    drift: ledger.drift.entries(),
  };
}

/** Everything the report of a refused fit is made from. */
export interface RefusedReportInputs {
  refusal: RefitRefusal;
  liveVersion: string;
  shadowBefore: string | null;
  /** The exit code the run ends with. */
  exitCode: number;
  createdAt: Date;
}

/**
 * The report of a run whose candidate's fit was refused: the run's fields as in {@link buildReport},
 * the refusal (first error's check and message, exit code) and every error as a reason.
 * @example const report = buildRefusedReport({ refusal, liveVersion, shadowBefore: null, exitCode: 1, createdAt: new Date() });
 */
export function buildRefusedReport(inputs: RefusedReportInputs): RenewRefusedReport {
  const { diagnostics, read } = inputs.refusal;
  const errors = diagnostics.filter((d) => d.severity === "error");
  const first = errors[0] ?? diagnostics[0];
  if (read.window === null) throw new Error("a renew refit always has a training window");
  return {
    format: RENEW_REPORT_FORMAT,
    createdAt: inputs.createdAt.toISOString(),
    outcome: "refused",
    reasons: errors.slice(0, 20).map((d) => `${d.code}: ${d.message}`),
    refusal: { check: first?.code ?? "fit", message: first?.message ?? inputs.refusal.message, exitCode: inputs.exitCode },
    liveVersion: inputs.liveVersion,
    candidateVersion: null,
    shadowBefore: inputs.shadowBefore,
    window: windowPart(read.window),
    ledger: ledgerPart(read.source, read.counts),
    labels: { rows: read.labels.rows, fraud: read.labels.fraudCount },
    diagnostics: diagnosticsPart(diagnostics),
  };
}

function windowPart(window: TimeWindow): RenewReport["window"] {
  return { from: iso(window.fromMs), to: iso(window.toMs), days: (window.toMs - window.fromMs) / 86_400_000 };
}

function ledgerPart(source: string, counts: RefitCounts): RenewReport["ledger"] {
  return {
    source,
    rowsRead: counts.rowsRead,
    rowsInWindow: counts.rowsRead - counts.outsideWindow,
    confirmedFraudLeftOut: counts.excludedConfirmedFraud,
    ledgerFraudLeftOut: counts.excludedLedgerFraud,
    dismissedKept: counts.dismissedKept,
    rowsUsed: counts.rowsUsed,
  };
}

function diagnosticsPart(diagnostics: readonly Diagnostic[]): RenewReport["diagnostics"] {
  return diagnostics.map((d) => ({ severity: d.severity, code: d.code, message: d.message }));
}

/** The short report for people: the verdict first, then the figures behind it. */
export function reportLines(report: RenewReport, refit: RefitOutcome): string[] {
  const verdict =
    report.outcome === "published"
      ? `published ${report.candidateVersion} as the shadow beside live ${report.liveVersion}; promote it on the model page once the agreement is read`
      : report.outcome === "unchanged"
        ? `${report.candidateVersion} is already ${report.candidateVersion === report.liveVersion ? "the live model" : "the shadow"}; nothing published`
        : `held back ${report.candidateVersion}: the gate found ${report.reasons.length} ${report.reasons.length === 1 ? "problem" : "problems"}; it is kept for a person, not scoring`;
  const shifted = report.drift.filter((d) => d.level === "watch" || d.level === "shifted");
  return [
    `window ${report.window.from} – ${report.window.to} (${formatForPeople(report.window.days, 3)} days): ` +
      `${formatCount(report.ledger.rowsInWindow)} payments, ${formatCount(report.ledger.rowsUsed)} fitted ` +
      `(${formatCount(report.ledger.confirmedFraudLeftOut + report.ledger.ledgerFraudLeftOut)} fraud left out, ${formatCount(report.ledger.dismissedKept)} dismissed flags kept)`,
    ...refit.backtest.lines,
    `flag overlap on the window (Jaccard): ${formatForPeople(jaccard(report.overlap), 4)}`,
    `drift of the window against live training: ${shifted.length === 0 ? "every column stable" : shifted.map((d) => `${d.name} ${d.level} (PSI ${formatForPeople(d.psi ?? Number.NaN, 3)})`).join(", ")}`,
    "gate:",
    ...report.gate.checks.map((c) => `  ${c.passed ? "pass" : "FAIL"}  ${c.rule}: ${c.found}`),
    "",
    verdict,
  ];
}

function iso(ms: number): string {
  return new Date(ms).toISOString();
}

/** The report's file name inside the keep folder (a refusal, without a candidate, is named by its time). */
export function reportFileName(report: RenewRunReport): string {
  if (report.outcome === "refused") return `renew-refused-${report.createdAt.replace(/[:.]/g, "")}.json`;
  return `renew-${report.candidateVersion}-${report.outcome}.json`;
}
