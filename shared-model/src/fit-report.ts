/** The fit's report for people: what was read, how the model was shaped and estimated, the cutoff. */
import type { SealedFit } from "./fit-artifact";
import type { FitOptions, FitReport } from "./fit-types";
import { formatCount as count } from "./format-count";
import { formatForPeople as num, formatPercent as pct } from "./format-number";
import type { ModelSlot, ModelSlots } from "./fit-slots";
import type { CovarianceShape, Diagnostic, EstimatorName } from "./types";

/** Everything the report speaks of. */
export interface ReportInput {
  options: FitOptions;
  rowsRead: number;
  rowsUsed: number;
  rowsExcludedAsFraud: number;
  shape: CovarianceShape;
  shapeReason: string;
  fitted: ModelSlot[];
  /** A line saying where the robust estimator ran when not on every row; omitted otherwise. */
  robustNote?: string;
  fallbacks: Map<string, string>;
  segmentCounts: Map<string, number>;
  warnings: Diagnostic[];
  cut: { mahalanobisSq: number; tailProbability: number; flagRate: number; lawReason?: string; predictiveKeys?: string[] };
  logDensity: Record<string, number>;
  n: number;
  minSegmentRows: number;
  seed: number;
}

/** What a finished fit reports besides the sealed artifact. */
export interface FitSummary {
  options: FitOptions;
  sealed: SealedFit;
  slots: ModelSlots;
  training: { rowsRead: number; rowsUsed: number; rowsExcludedAsFraud: number };
  shape: CovarianceShape;
  shapeReason: string;
  segmentCounts: Map<string, number>;
  n: number;
  minSegmentRows: number;
  seed: number;
  robustNote?: string;
}

/** The report of a finished fit: its lines for people and the figures behind them. */
export function fitReport(r: FitSummary): FitReport {
  const { sealed, slots, segmentCounts } = r;
  const { fitted, diagnostics, cut, logDensity } = sealed;
  return {
    lines: reportLines({ ...r, ...r.training, fitted, fallbacks: slots.fallbacks, warnings: diagnostics, cut, logDensity }),
    diagnostics,
    shape: r.shape,
    shapeReason: r.shapeReason,
    rowsUsed: r.training.rowsUsed,
    segments: [
      ...fitted.map((s) => ({ key: s.key, rows: s.rows })),
      ...[...slots.fallbacks.keys()].sort().map((key) => ({ key, rows: segmentCounts.get(key) ?? 0, fallback: slots.fallbacks.get(key)! })),
    ],
    conditionNumber: slots.pooled.conditionNumber,
  };
}

/** The report's lines for people: rows, shape, estimator, segments, conditioning, warnings, cutoff. */
export function reportLines(r: ReportInput): string[] {
  const lines: string[] = [];
  const source = r.options.source ? ` from ${r.options.source}` : "";
  lines.push(`rows: ${count(r.rowsRead)} read${source}, ${count(r.rowsUsed)} used, ${count(r.rowsExcludedAsFraud)} excluded as labelled fraud`);
  lines.push(`covariance: ${r.shape} (${r.shapeReason})`);
  lines.push(`estimator: ${estimatorLine(r.options.estimator, r.fitted[0], r.seed)}`);
  if (r.robustNote !== undefined) lines.push(r.robustNote);
  if (r.options.segmentBy !== null) {
    lines.push(`segments by '${r.options.segmentBy}' (own model from ${count(r.minSegmentRows)} rows):`);
    for (const slot of r.fitted.slice(1)) {
      lines.push(`  ${slot.key}: ${count(slot.rows)} rows, ${estimatorBrief(slot)}, condition number ${num(slot.conditionNumber)}`);
    }
    for (const key of [...r.fallbacks.keys()].sort()) {
      lines.push(`  ${key}: ${count(r.segmentCounts.get(key) ?? 0)} rows → pooled model (${r.fallbacks.get(key)})`);
    }
    if (r.segmentCounts.size === 0) lines.push(`  (no row has a value in '${r.options.segmentBy}'; every row is pooled)`);
  }
  lines.push(`condition number of the pooled covariance: ${num(r.fitted[0].conditionNumber)}`);
  for (const d of r.warnings) {
    if (d.severity === "info") continue;
    lines.push(`${d.severity}: ${d.message}${d.remedy ? ` — ${d.remedy}` : ""}`);
  }
  lines.push(
    `cutoff: flag when d² > ${num(r.cut.mahalanobisSq)} (tail probability P(χ²${r.n} > d²) < ${num(r.cut.tailProbability)}); ` +
      `expected to flag ${pct(r.cut.flagRate)} of new payments (asked ${pct(r.options.cutoffRate)}); chosen by the ${r.cut.lawReason ?? "in-sample quantile"}`,
  );
  lines.push(
    `log-density cutoff per segment: ${Object.entries(r.logDensity)
      .map(([key, value]) => `${key} ${num(value)}`)
      .join(", ")}`,
  );
  lines.push(tailLawLine(r.cut.predictiveKeys ?? [], r.fitted.length));
  return lines;
}

/** Which law the reported tail probabilities read, per model (`tail-law.ts`). */
function tailLawLine(predictiveKeys: readonly string[], models: number): string {
  if (predictiveKeys.length === 0) return "tail probabilities: P(χ²ₙ > d²) for every model";
  const named = predictiveKeys.map((k) => `'${k}'`).join(", ");
  const rest = predictiveKeys.length < models ? "; P(χ²ₙ > d²) for the others" : "";
  return `tail probabilities: the predictive law of a new payment, P(n(m + 1)/(m − n)·F(n, m − n) > d²), for ${named} (as their cutoff)${rest}`;
}

function estimatorLine(estimator: EstimatorName, pooled: ModelSlot, seed: number): string {
  const details = pooled.estimate?.details;
  if (details?.estimator === "shrinkage") {
    return `shrinkage (Ledoit–Wolf toward (tr S/n)·I, divides by m), pooled δ = ${num(details.shrinkage)}`;
  }
  if (details?.estimator === "robust") {
    return (
      `robust (FAST-MCD, seed ${details.seed ?? seed}): h = ${count(details.h)} of ${count(pooled.rows)} rows, ` + `${count(details.reweightedRows)} rows kept after reweighting`
    );
  }
  return `${estimator} (maximum likelihood, divides by m)`;
}

function estimatorBrief(slot: ModelSlot): string {
  const details = slot.estimate?.details;
  if (details?.estimator === "shrinkage") return `δ = ${num(details.shrinkage)}`;
  if (details?.estimator === "robust") return `h = ${count(details.h)}, ${count(details.reweightedRows)} rows kept`;
  return "classical";
}
