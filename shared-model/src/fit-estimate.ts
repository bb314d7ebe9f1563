/**
 * Estimation after the moments are in: constant-column checks, each model's covariance by the
 * chosen estimator, its conditioning diagnostics, and its artifact segment. A segment that fails
 * goes back to the pooled model with a warning; the pooled model failing refuses the fit.
 */
import { buildSegment } from "./artifact";
import { FitRefusal, diagnoseColumns, diagnoseCovariance } from "./diagnostics";
import { classicalEstimate, shrinkageEstimate, toDiagonal, type CovarianceEstimate } from "./estimators";
import { formatCount as count } from "./format-count";
import type { ModelSlot, ModelSlots } from "./fit-slots";
import { fromRows } from "./linalg";
import { ExactFitError, robustEstimate } from "./mcd";
import type { CovarianceShape, Diagnostic, EstimatorName } from "./types";
import { formatForPeople } from "./format-number";

/** What estimation needs to know. */
export interface EstimationInput {
  estimator: EstimatorName;
  shape: CovarianceShape;
  /** Model column names. */
  columns: readonly string[];
  seed: number;
  supportFraction?: number;
}

/** True when any diagnostic is an error. */
export function hasError(diagnostics: readonly Diagnostic[]): boolean {
  return diagnostics.some((d) => d.severity === "error");
}

function firstError(diagnostics: readonly Diagnostic[]): string {
  return diagnostics.find((d) => d.severity === "error")!.message;
}

function inSegment(d: Diagnostic, key: string): Diagnostic {
  return { ...d, message: `segment '${key}': ${d.message}` };
}

/**
 * Constant columns refuse the pooled fit and send a segment back to the pooled model.
 * @throws FitRefusal when the pooled model has a constant column
 */
export function checkConstantColumns(slots: ModelSlots, columns: readonly string[]): void {
  const columnDiagnostics = diagnoseColumns(slots.pooled.moments, [...columns]);
  if (hasError(columnDiagnostics)) throw new FitRefusal([...slots.warnings, ...columnDiagnostics]);
  slots.warnings.push(...columnDiagnostics);
  for (const slot of slots.all.slice(1)) {
    const own = diagnoseColumns(slot.moments, [...columns]);
    if (hasError(own)) slots.demote(slot, firstError(own));
  }
}

/**
 * Estimates every live model, diagnoses its conditioning and builds its artifact segment; then
 * lays out each live model's precision and mean for scoring. The robust rows are released.
 * @throws FitRefusal when the pooled model cannot be estimated, with every diagnostic so far
 */
export function estimateSlots(slots: ModelSlots, input: EstimationInput): void {
  const { estimator, shape, columns, seed, supportFraction } = input;
  const n = columns.length;
  for (const slot of slots.live()) {
    const problems: Diagnostic[] = [];
    try {
      let estimate = estimateFor(slot, estimator, n, seed, supportFraction);
      // Dependencies are sought in the full estimate even for a diagonal model, where they are
      // warnings (the same evidence counted twice) rather than errors.
      const conditioning = diagnoseCovariance(estimate.covariance, n, [...columns], { mean: estimate.mean, shape, rows: slot.rows });
      if (shape === "diagonal") {
        estimate = toDiagonal(estimate);
        slot.conditionNumber = diagonalConditionNumber(estimate.covariance, n);
        problems.push(...conditioning.diagnostics.filter((d) => d.code !== "condition-number"));
      } else {
        slot.conditionNumber = conditioning.conditionNumber;
        problems.push(...conditioning.diagnostics);
      }
      if (!hasError(problems)) {
        slot.segment = buildSegment(estimate.mean, estimate.covariance, n, slot.rows, estimate.details, [...columns]);
        slot.estimate = estimate;
      }
    } catch (error) {
      if (error instanceof FitRefusal) throw error;
      if (error instanceof ExactFitError) {
        problems.push(exactFitDiagnostic(error, slot, columns, mcdSubsetSize(robustRows(slot), n, supportFraction)));
      } else
        problems.push({
          code: "estimate-failed",
          severity: "error",
          message: `the ${estimator} covariance of ${slot.key === "*" ? "the pooled model" : `segment '${slot.key}'`} cannot be used: ${(error as Error).message}`,
          remedy: "drop one of the columns named, or fit with the shrinkage estimator (--estimator shrinkage), which is always well conditioned",
        });
    }
    if (slot.key === "*") {
      if (hasError(problems)) throw new FitRefusal([...slots.warnings, ...problems]);
      slots.warnings.push(...problems);
    } else if (hasError(problems)) {
      slots.demote(slot, firstError(problems));
    } else {
      slots.warnings.push(...problems.map((d) => inSegment(d, slot.key)));
    }
    // The rows are no longer needed; let them go before the cutoff pass.
    slot.data = null;
  }
  for (const slot of slots.live()) {
    slot.precision = fromRows(slot.segment!.precision);
    slot.mean = Float64Array.from(slot.segment!.mean);
  }
}

/** Rows the robust estimator holds for a slot: all of its rows, or the sample it was given. */
function robustRows(slot: ModelSlot): number {
  return slot.data === null ? slot.rows : slot.filled;
}

/** MCD subset size for `rows` rows: the default ⌊(m+n+1)/2⌋, raised to ⌈α·m⌉ when a support fraction is given. */
export function mcdSubsetSize(rows: number, n: number, supportFraction?: number): number {
  const breakdown = Math.floor((rows + n + 1) / 2);
  return Math.min(rows, supportFraction === undefined ? breakdown : Math.max(breakdown, Math.ceil(supportFraction * rows)));
}

function estimateFor(slot: ModelSlot, estimator: EstimatorName, n: number, seed: number, supportFraction?: number): CovarianceEstimate {
  switch (estimator) {
    case "classical":
      return classicalEstimate(slot.moments);
    case "shrinkage":
      return shrinkageEstimate(slot.moments, slot.fourth!.sum);
    case "robust":
      return robustEstimate(slot.data!.subarray(0, slot.filled * n), slot.filled, n, { seed, h: mcdSubsetSize(slot.filled, n, supportFraction) });
  }
}

/**
 * Names the hyperplane of a FAST-MCD exact fit in column names: typically a count that is 0 in
 * most rows (more than the h rows the raw MCD keeps), so the robust covariance would be singular.
 */
function exactFitDiagnostic(error: ExactFitError, slot: ModelSlot, columns: readonly string[], h: number): Diagnostic {
  const rows = robustRows(slot);
  const terms = error.normal
    .map((c, j) => ({ c, name: columns[j] }))
    .filter((t) => Math.abs(t.c) >= 0.005)
    .sort((a, b) => Math.abs(b.c) - Math.abs(a.c));
  const lead = terms[0];
  // Solve normal·x = offset for the leading column: lead = Σ k_j·col_j + c.
  const others = terms.slice(1).map((t) => ({ k: -t.c / lead.c, name: t.name }));
  const constant = error.offset / lead.c;
  let right = others.map((t, i) => `${t.k < 0 ? (i === 0 ? "−" : "− ") : i === 0 ? "" : "+ "}${Math.abs(t.k).toFixed(2)}·${t.name}`).join(" ");
  if (right === "") right = formatForPeople(constant);
  else if (Math.abs(constant) >= 0.005) right += ` ${constant < 0 ? "−" : "+"} ${Math.abs(constant).toFixed(2)}`;
  const equation = `${lead.name} = ${right}`;
  const where = slot.key === "*" ? "" : ` of segment '${slot.key}'`;
  return {
    code: "robust-exact-fit",
    severity: "error",
    message:
      `${count(error.rowsOnHyperplane)} of ${count(rows)} rows${where} satisfy ${equation} exactly (in model units), ` +
      `more than the ${count(h)} rows the robust fit keeps, so its covariance would be singular`,
    columns: terms.map((t) => t.name),
    equation,
    remedy:
      `drop ${terms.length === 1 ? lead.name : `one of ${terms.map((t) => t.name).join(", ")}`}, ` +
      `or raise --support-fraction above ${(error.rowsOnHyperplane / rows).toFixed(2)} so the robust fit keeps more rows, ` +
      `or use --estimator shrinkage or classical, which use every row`,
  };
}

/** Largest over smallest variance: the condition number of a diagonal covariance. */
function diagonalConditionNumber(covariance: Float64Array, n: number): number {
  let lo = Infinity;
  let hi = 0;
  for (let i = 0; i < n; i++) {
    lo = Math.min(lo, covariance[i * n + i]);
    hi = Math.max(hi, covariance[i * n + i]);
  }
  return lo > 0 ? hi / lo : Infinity;
}
