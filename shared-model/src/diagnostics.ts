/**
 * Fit diagnostics: whether there are enough rows for the chosen covariance shape, which columns are
 * constant, how well conditioned the covariance is, and which columns are linear functions of
 * others — named as equations an analyst can read ("total ≈ 1.00·subtotal + 1.00·shipping").
 *
 * Severity `error` means the fit must stop: the caller throws {@link FitRefusal} with the list.
 * Every diagnostic carries a plain sentence with the numbers and, where one exists, a remedy that
 * names the option to change.
 */
import { EigenvalueDecomposition, Matrix } from "ml-matrix";
import type { CovarianceShape, Diagnostic } from "./types";
import { EstimationInputError, type MomentAccumulator } from "./moments";
import { FULL_COVARIANCE_ROWS_PER_COLUMN } from "./estimators";
import { countOf, formatCount } from "./format-count";
import { formatForPeople } from "./format-number";
import { symmetrize } from "./linalg";

/**
 * Thrown by the fit when any diagnostic has severity `error`; carries every diagnostic found
 * (errors, warnings and infos) so the caller can print them all.
 * @example if (diagnostics.some((d) => d.severity === "error")) throw new FitRefusal(diagnostics);
 */
export class FitRefusal extends Error {
  /** All diagnostics of the refused fit, errors first. */
  readonly diagnostics: Diagnostic[];

  /** @param diagnostics the findings; the message lists the errors among them */
  constructor(diagnostics: Diagnostic[]) {
    const order = { error: 0, warning: 1, info: 2 } as const;
    const sorted = [...diagnostics].sort((a, b) => order[a.severity] - order[b.severity]);
    const errors = sorted.filter((d) => d.severity === "error");
    const shown = errors.length > 0 ? errors : sorted;
    super(`fit refused (${errors.length} error${errors.length === 1 ? "" : "s"}): ${shown.map((d) => d.message).join("; ")}`);
    this.name = "FitRefusal";
    this.diagnostics = sorted;
  }
}

/**
 * Throws {@link FitRefusal} when any diagnostic has severity `error`; otherwise returns quietly.
 * @throws {FitRefusal} carrying every diagnostic
 * @example refuseIfErrors([...diagnoseRowCount(m, n, shape), ...diagnoseColumns(acc, columns)]);
 */
export function refuseIfErrors(diagnostics: readonly Diagnostic[]): void {
  if (diagnostics.some((d) => d.severity === "error")) throw new FitRefusal([...diagnostics]);
}

/**
 * Row-count checks for the shape to be fitted. A full covariance of n columns has rank ≤ m − 1,
 * so it needs m ≥ n + 1 rows to be invertible at all (error `too-few-rows`), and about 10·n rows to
 * be estimated well (warning `few-rows`, common practice). A diagonal covariance needs m ≥ 2 rows
 * for a variance (error `too-few-rows`).
 * @throws {EstimationInputError} on a negative or non-integer row count, n < 1 or an unknown shape
 * @example diagnoseRowCount(7, 8, "full")[0].message
 *   // "7 rows for 8 columns: a full covariance needs at least 9 rows (n+1); use --covariance diagonal or more data"
 */
export function diagnoseRowCount(rows: number, n: number, shape: CovarianceShape): Diagnostic[] {
  if (!Number.isInteger(rows) || rows < 0) throw new EstimationInputError("rows", "must be an integer ≥ 0", "an integer ≥ 0", rows);
  if (!Number.isInteger(n) || n < 1) throw new EstimationInputError("n", "must be an integer ≥ 1 (the number of model columns)", "an integer ≥ 1", n);
  if (shape !== "full" && shape !== "diagonal") throw new EstimationInputError("shape", 'must be "full" or "diagonal"', '"full" or "diagonal"', shape);
  const have = `${countOf(rows, "row")} for ${countOf(n, "column")}`;
  const advised = FULL_COVARIANCE_ROWS_PER_COLUMN * n;
  if (shape === "full") {
    if (rows < n + 1) {
      return [
        {
          code: "too-few-rows",
          severity: "error",
          message: `${have}: a full covariance needs at least ${countOf(n + 1, "row")} (n+1); use --covariance diagonal or more data`,
          remedy: `use --covariance diagonal, or fit on more data (${formatCount(advised)} rows for ${FULL_COVARIANCE_ROWS_PER_COLUMN} per column)`,
        },
      ];
    }
    if (rows < advised) {
      return [
        {
          code: "few-rows",
          severity: "warning",
          message: `${have}: below the ${formatCount(advised)} rows (${FULL_COVARIANCE_ROWS_PER_COLUMN} per column) a full covariance is usually fitted on; its ${formatCount((n * (n + 1)) / 2)} entries will be noisy`,
          remedy: "use --covariance diagonal or --estimator shrinkage, or fit on more data",
        },
      ];
    }
    return [];
  }
  if (rows < 2) {
    return [
      {
        code: "too-few-rows",
        severity: "error",
        message: `${have}: a diagonal covariance needs at least 2 rows to estimate a variance`,
        remedy: "fit on more data",
      },
    ];
  }
  return [];
}

/**
 * Whether a column's spread is nil: variance exactly 0, or a standard deviation below 1e-12 of the
 * column's magnitude — values that agree to 12 significant digits differ by round-off, not by data.
 */
export function isConstantColumn(variance: number, mean: number): boolean {
  return !(variance > 0) || Math.sqrt(variance) <= 1e-12 * Math.abs(mean);
}

/**
 * Names every constant (zero-variance) column (`constant-column`, severity error for either shape:
 * a zero variance makes the full covariance singular and the diagonal one undefined).
 * With fewer than 2 rows nothing can be said about variances and the list is empty;
 * {@link diagnoseRowCount} reports that case.
 * @param acc the first-pass moments
 * @param columns model column names, one per accumulator column
 * @throws {EstimationInputError} when the number of names differs from acc.n
 * @example diagnoseColumns(acc, ["amount", "items", "currency_code"]) // [{ code: "constant-column", columns: ["currency_code"], … }]
 */
export function diagnoseColumns(acc: MomentAccumulator, columns: readonly string[]): Diagnostic[] {
  checkColumns(columns, acc.n);
  const m = acc.count;
  if (m < 2) return [];
  const out: Diagnostic[] = [];
  for (let j = 0; j < acc.n; j++) {
    const variance = acc.comoment[j * acc.n + j] / m;
    const mean = acc.mean[j];
    if (!isConstantColumn(variance, mean)) continue;
    const name = columns[j];
    out.push({
      code: "constant-column",
      severity: "error",
      message: `column ${name} is constant (${formatForPeople(mean)} in all ${formatCount(m)} rows): its variance is zero, so it carries no evidence and the covariance cannot be inverted`,
      columns: [name],
      remedy: `drop the feature that produces ${name} from the feature list`,
    });
  }
  return out;
}

/** Options of {@link diagnoseCovariance}. */
export interface CovarianceDiagnosisOptions {
  /** Column means (model units); when given, dependency equations include their constant term. */
  mean?: ArrayLike<number>;
  /** Shape that will be fitted (default `full`): dependencies are errors for full, warnings for diagonal. */
  shape?: CovarianceShape;
  /** Rows behind the covariance; with rows < n + 1 the singularity is blamed on the row count. */
  rows?: number;
}

/** Result of {@link diagnoseCovariance}. */
export interface CovarianceDiagnosis {
  /** λmax / λmin of the (symmetrised) covariance; Infinity when λmin ≤ 0 or within round-off (n·ε·λmax) of 0. */
  conditionNumber: number;
  diagnostics: Diagnostic[];
}

/** Condition number above which the covariance is reported as a warning rather than an info. */
export const CONDITION_NUMBER_WARNING = 1e10;

/**
 * Relative eigenvalue tolerance of the unit-variance (correlation) matrix under which a direction
 * counts as a dependency: λ ≤ 1e-10 · k · λmax (k columns). Why: an exact dependency leaves an
 * eigenvalue at round-off level, ~1e-16·λmax, and even a million rows of accumulation error stay
 * near √m·ε ≈ 1e-13; a genuine feature direction with eigenvalue 1e-10 would mean the relation
 * holds to five significant digits of the column's spread (√1e-10 = 1e-5) — a definition, not a
 * correlation. Working on the correlation rather than the covariance makes the test blind to
 * units: an amount in cents beside a share in [0, 1] is not a dependency.
 */
export const DEPENDENCY_TOLERANCE = 1e-10;

/**
 * Eigen-analysis of a covariance (symmetrised first): its condition number (`condition-number`,
 * info, or warning above 1e10) and, for every direction of (near-)zero variance, the linear
 * dependency it stands for (`linear-dependency`, error for shape full, warning for diagonal), plus
 * one `singular-covariance` summary (error) when the fitted shape cannot be inverted.
 *
 * Dependencies are found on the correlation matrix (see {@link DEPENDENCY_TOLERANCE}); the null
 * space is reduced to row echelon form by threshold pivoting, so each relation has its own subject
 * column and no other relation mentions that subject. The subject is the latest column among those
 * whose unit-variance coefficient is at least half the largest (a copied or derived column usually
 * follows its sources; the threshold keeps the other coefficients bounded).
 *
 * Each relation is written in model units as `subject ≈ c₁·col₁ − c₂·col₂ + c₀`: coefficients to
 * two decimals; a term is dropped when its unit-variance coefficient is below 0.005; U+2212 minus;
 * the constant c₀ is the relation's own (from `options.mean`), shown when it is at least 0.005 and
 * more than round-off, and left out without a mean. Constant columns count toward the singularity
 * but are named by {@link diagnoseColumns}, not here. With `options.rows` < n + 1 the singularity
 * is blamed on the row count and no relations are reported (they would be artefacts).
 *
 * @param covariance n×n row-major (any denominator; the analysis is scale-free)
 * @param n number of columns
 * @param columns model column names, length n
 * @throws {EstimationInputError} on a size mismatch, a non-finite entry or a bad option
 * @example diagnoseCovariance(cov, 3, ["subtotal", "shipping", "total"], { mean }).diagnostics
 *   // […, { code: "linear-dependency", equation: "total ≈ 1.00·subtotal + 1.00·shipping", … }]
 */
export function diagnoseCovariance(covariance: Float64Array, n: number, columns: readonly string[], options: CovarianceDiagnosisOptions = {}): CovarianceDiagnosis {
  if (!Number.isInteger(n) || n < 1) throw new EstimationInputError("n", "must be an integer ≥ 1 (the number of model columns)", "an integer ≥ 1", n);
  if (!(covariance instanceof Float64Array) || covariance.length !== n * n) {
    throw new EstimationInputError("covariance", `must be a Float64Array of n × n = ${n} × ${n} values`, n * n, covariance?.length);
  }
  for (let k = 0; k < covariance.length; k++) {
    if (!Number.isFinite(covariance[k])) throw new EstimationInputError(`covariance[${k}]`, "must be a finite number", "a finite number", covariance[k]);
  }
  checkColumns(columns, n);
  const shape = options.shape ?? "full";
  if (shape !== "full" && shape !== "diagonal") throw new EstimationInputError("options.shape", 'must be "full" or "diagonal"', '"full" or "diagonal"', shape);
  const mean = options.mean;
  if (mean !== undefined) {
    if (mean.length !== n) throw new EstimationInputError("options.mean", "must have one value per column", n, mean.length);
    for (let i = 0; i < n; i++) {
      if (!Number.isFinite(mean[i])) throw new EstimationInputError(`options.mean[${i}]`, "must be a finite number", "a finite number", mean[i]);
    }
  }
  const rows = options.rows;
  if (rows !== undefined && (!Number.isInteger(rows) || rows < 0)) {
    throw new EstimationInputError("options.rows", "must be an integer ≥ 0", "an integer ≥ 0", rows);
  }

  const sym = symmetrize(covariance, n);
  const spectrum = symmetricEigen(sym, n);
  const lambdaMax = spectrum.values[n - 1];
  const lambdaMin = spectrum.values[0];
  // An eigenvalue within the solver's accuracy (~n·ε·λmax) of zero is zero for all we know.
  const conditionNumber = lambdaMin > n * Number.EPSILON * lambdaMax ? lambdaMax / lambdaMin : Number.POSITIVE_INFINITY;

  // Split off constant columns; the rest is analysed on the unit-variance scale.
  const constant: number[] = [];
  const kept: number[] = [];
  for (let i = 0; i < n; i++) {
    if (isConstantColumn(sym[i * n + i], mean === undefined ? 0 : mean[i])) constant.push(i);
    else kept.push(i);
  }
  const k = kept.length;
  const sd = new Float64Array(n);
  for (const i of kept) sd[i] = Math.sqrt(sym[i * n + i]);
  const correlation = new Float64Array(k * k);
  for (let a = 0; a < k; a++) {
    for (let b = 0; b < k; b++) {
      const i = kept[a];
      const j = kept[b];
      correlation[a * k + b] = a === b ? 1 : sym[i * n + j] / (sd[i] * sd[j]);
    }
  }
  let correlationCondition = Number.NaN;
  const nullBasis: Float64Array[] = [];
  if (k > 0) {
    const corr = symmetricEigen(correlation, k);
    const cMax = corr.values[k - 1];
    const cMin = corr.values[0];
    correlationCondition = cMin > k * Number.EPSILON * cMax ? cMax / cMin : Number.POSITIVE_INFINITY;
    const tolerance = DEPENDENCY_TOLERANCE * k * cMax;
    for (let e = 0; e < k; e++) if (corr.values[e] <= tolerance) nullBasis.push(corr.vectors[e]);
  }

  const diagnostics: Diagnostic[] = [conditionDiagnostic(conditionNumber, lambdaMax, lambdaMin, correlationCondition)];
  const tooFewRows = rows !== undefined && rows < n + 1;
  const relations = tooFewRows ? [] : reduceNullSpace(nullBasis, k);
  const involved = new Set<string>();
  const equations: string[] = [];
  for (const relation of relations) {
    const dep = describeRelation(relation, kept, sd, columns, mean, correlation, k);
    dep.columns.forEach((c) => involved.add(c));
    equations.push(dep.equation);
    diagnostics.push({
      code: "linear-dependency",
      severity: shape === "full" ? "error" : "warning",
      message:
        `${dep.subject} is a linear function of ${listNames(dep.columns.slice(1))} in the training rows: ${dep.equation}` +
        (dep.residualShare < 1e-12 ? " (exactly, up to round-off)" : ` (to within ${formatForPeople(dep.residualShare)} of ${dep.subject}'s standard deviation)`) +
        (shape === "full" ? "; a full covariance with such a column cannot be inverted" : "; the diagonal model counts this evidence more than once"),
      columns: dep.columns,
      equation: dep.equation,
      remedy: `drop one of ${listNames(dep.columns)} from the features, or use --estimator shrinkage`,
    });
  }

  const constantNames = constant.map((i) => columns[i]);
  const nullDirections = nullBasis.length + constant.length;
  if (shape === "full" && (nullDirections > 0 || (tooFewRows && conditionNumber === Number.POSITIVE_INFINITY))) {
    const named = [...involved, ...constantNames];
    if (tooFewRows) {
      diagnostics.push({
        code: "singular-covariance",
        severity: "error",
        message: `the covariance of ${countOf(n, "column")} is singular whatever the data: with ${countOf(rows ?? 0, "row")} its rank is at most ${Math.max(0, (rows ?? 0) - 1)}`,
        columns: named.length > 0 ? named : undefined,
        remedy: "use --covariance diagonal, --estimator shrinkage, or fit on more data",
      });
    } else {
      const parts: string[] = [];
      if (equations.length > 0) parts.push(`${countOf(equations.length, "linear dependency", "linear dependencies")} (${equations.join("; ")})`);
      if (constantNames.length > 0) parts.push(`${countOf(constantNames.length, "constant column")} (${constantNames.join(", ")})`);
      diagnostics.push({
        code: "singular-covariance",
        severity: "error",
        message: `the covariance of ${countOf(n, "column")} is singular: ${countOf(nullDirections, "direction")} with no variance — ${parts.join(" and ")}`,
        columns: named,
        remedy: `drop one of the named columns (${named.join(", ")}), or use --estimator shrinkage`,
      });
    }
  } else if (shape === "diagonal" && constant.length > 0) {
    diagnostics.push({
      code: "singular-covariance",
      severity: "error",
      message: `the diagonal covariance has zero variance for ${listNames(constantNames)}`,
      columns: constantNames,
      remedy: `drop the feature that produces ${listNames(constantNames, "or")} from the feature list`,
    });
  }
  return { conditionNumber, diagnostics };
}

function conditionDiagnostic(condition: number, lambdaMax: number, lambdaMin: number, correlationCondition: number): Diagnostic {
  const warn = !(condition <= CONDITION_NUMBER_WARNING);
  const unitFree = Number.isNaN(correlationCondition) ? "" : `; ${formatForPeople(correlationCondition)} once every column is scaled to unit variance`;
  const message =
    condition === Number.POSITIVE_INFINITY
      ? `condition number ∞: the smallest eigenvalue of the covariance (${formatForPeople(lambdaMin)}) is zero within round-off of the largest (${formatForPeople(lambdaMax)})${unitFree}`
      : `condition number ${formatForPeople(condition)} (largest / smallest eigenvalue of the covariance: ${formatForPeople(lambdaMax)} / ${formatForPeople(lambdaMin)})${unitFree}`;
  const diagnostic: Diagnostic = { code: "condition-number", severity: warn ? "warning" : "info", message };
  if (warn) {
    diagnostic.remedy =
      correlationCondition <= CONDITION_NUMBER_WARNING
        ? "the columns' scales differ widely: give the wide-ranging column a log or log1p transform"
        : "drop one of the nearly dependent columns, or use --estimator shrinkage";
  }
  return diagnostic;
}

interface Spectrum {
  /** Eigenvalues, ascending. */
  values: Float64Array;
  /** Unit eigenvectors, `vectors[e]` belonging to `values[e]`. */
  vectors: Float64Array[];
}

/**
 * Eigen-decomposition of a symmetric matrix with ml-matrix (Householder tridiagonalisation + QL).
 * `assumeSymmetric` is passed because ml-matrix's own symmetry test is exact and would send a
 * matrix with round-off asymmetry to the non-symmetric solver; callers symmetrise first.
 */
function symmetricEigen(a: Float64Array, n: number): Spectrum {
  const rows: number[][] = [];
  for (let i = 0; i < n; i++) rows.push(Array.from(a.subarray(i * n, (i + 1) * n)));
  const evd = new EigenvalueDecomposition(new Matrix(rows), { assumeSymmetric: true });
  const raw = evd.realEigenvalues;
  const v = evd.eigenvectorMatrix;
  const order = raw.map((_, e) => e).sort((x, y) => raw[x] - raw[y]);
  const values = Float64Array.from(order, (e) => raw[e]);
  const vectors = order.map((e) => {
    const out = new Float64Array(n);
    for (let i = 0; i < n; i++) out[i] = v.get(i, e);
    return out;
  });
  return { values, vectors };
}

/** One reduced relation Σ a_c z_c = 0 on the unit-variance scale, a_pivot = 1. */
interface Relation {
  pivot: number;
  coefficients: Float64Array;
}

/**
 * Threshold for pivot choice in {@link reduceNullSpace}: any entry within this factor of the
 * largest may be the pivot (threshold pivoting; Duff, Erisman & Reid, "Direct Methods for Sparse
 * Matrices", §5.4). It keeps every reduced coefficient ≤ 1/0.5 = 2 in unit-variance terms while
 * leaving room to pick the more readable subject.
 */
const PIVOT_THRESHOLD = 0.5;

/**
 * Reduced row echelon form of the null-space basis by threshold pivoting: among the entries within
 * {@link PIVOT_THRESHOLD} of the largest remaining |entry|, the one in the latest column becomes
 * the next subject (a derived or copied column usually follows its sources, so "total ≈ subtotal
 * + shipping" reads as the definition it is); its row is scaled to 1 there and that column is
 * cleared from every other row. An orthonormal basis mixes dependencies that share no columns;
 * after this each relation has a distinct subject and no relation mentions another's subject.
 */
function reduceNullSpace(basis: readonly Float64Array[], k: number): Relation[] {
  const rowsLeft = basis.map((b) => Float64Array.from(b));
  const pivots: number[] = [];
  const done: Float64Array[] = [];
  const used = new Uint8Array(k);
  while (rowsLeft.length > 0) {
    let largest = 0;
    for (const row of rowsLeft) for (let c = 0; c < k; c++) if (!used[c]) largest = Math.max(largest, Math.abs(row[c]));
    if (!(largest > 0)) break;
    let bestRow = -1;
    let bestCol = -1;
    let bestMag = 0;
    for (let r = 0; r < rowsLeft.length; r++) {
      for (let c = 0; c < k; c++) {
        if (used[c]) continue;
        const mag = Math.abs(rowsLeft[r][c]);
        if (mag < PIVOT_THRESHOLD * largest) continue;
        if (c > bestCol || (c === bestCol && mag > bestMag)) {
          bestRow = r;
          bestCol = c;
          bestMag = mag;
        }
      }
    }
    const [row] = rowsLeft.splice(bestRow, 1);
    const scale = row[bestCol];
    for (let c = 0; c < k; c++) row[c] /= scale;
    row[bestCol] = 1;
    for (const other of [...rowsLeft, ...done]) {
      const f = other[bestCol];
      if (f === 0) continue;
      for (let c = 0; c < k; c++) other[c] -= f * row[c];
      other[bestCol] = 0;
    }
    used[bestCol] = 1;
    pivots.push(bestCol);
    done.push(row);
  }
  return done.map((coefficients, r) => ({ pivot: pivots[r], coefficients }));
}

interface Dependency {
  subject: string;
  /** Subject first, then the columns kept in the equation. */
  columns: string[];
  equation: string;
  /** sd of (subject − right-hand side) as a share of the subject's sd. */
  residualShare: number;
}

/**
 * Turns z_p + Σ a_c z_c = 0 (z = (x − μ)/sd) into model units:
 * x_p ≈ Σ (−a_c·sd_p/sd_c)·x_c + (μ_p − Σ coef_c·μ_c).
 */
function describeRelation(
  relation: Relation,
  kept: readonly number[],
  sd: Float64Array,
  columns: readonly string[],
  mean: ArrayLike<number> | undefined,
  correlation: Float64Array,
  k: number,
): Dependency {
  const p = kept[relation.pivot];
  const a = relation.coefficients;
  const terms: { name: string; coef: number }[] = [];
  let constantTerm = mean === undefined ? 0 : mean[p];
  let constantScale = mean === undefined ? 0 : Math.abs(mean[p]);
  for (let c = 0; c < k; c++) {
    if (c === relation.pivot) continue;
    const j = kept[c];
    const coef = (-a[c] * sd[p]) / sd[j];
    if (mean !== undefined) {
      constantTerm -= coef * mean[j];
      constantScale += Math.abs(coef * mean[j]);
    }
    // The 0.005 cut applies to the unit-variance coefficient a_c, so it means the same whatever
    // the columns' units: a term moving the subject by under 0.5 % of its spread is left out.
    if (Math.abs(a[c]) >= 0.005) terms.push({ name: columns[j], coef });
  }
  let residualVariance = 0;
  for (let r = 0; r < k; r++) for (let c = 0; c < k; c++) residualVariance += a[r] * correlation[r * k + c] * a[c];
  const pieces: string[] = [];
  for (const t of terms) {
    const text = `${formatCoefficient(Math.abs(t.coef))}·${t.name}`;
    pieces.push(pieces.length === 0 ? (t.coef < 0 ? `−${text}` : text) : t.coef < 0 ? ` − ${text}` : ` + ${text}`);
  }
  // Shown when it reads as non-zero at two decimals and is more than round-off of the means.
  if (Math.abs(constantTerm) >= 0.005 && Math.abs(constantTerm) > 1e-9 * constantScale) {
    const text = Math.abs(constantTerm).toFixed(2);
    pieces.push(pieces.length === 0 ? (constantTerm < 0 ? `−${text}` : text) : constantTerm < 0 ? ` − ${text}` : ` + ${text}`);
  }
  const subject = columns[p];
  return {
    subject,
    columns: [subject, ...terms.map((t) => t.name)],
    equation: `${subject} ≈ ${pieces.length > 0 ? pieces.join("") : "0.00"}`,
    residualShare: Math.sqrt(Math.max(0, residualVariance)),
  };
}

/** Two decimals, as equations are read; a coefficient below 0.005 (tiny units ratio) keeps 3 significant digits. */
function formatCoefficient(abs: number): string {
  return abs >= 0.005 ? abs.toFixed(2) : abs.toPrecision(3);
}

function checkColumns(columns: readonly string[], n: number): void {
  if (!Array.isArray(columns) || columns.length !== n) {
    throw new EstimationInputError("columns", "must name every model column, one name per column", n, Array.isArray(columns) ? columns.length : columns);
  }
  columns.forEach((c, i) => {
    if (typeof c !== "string" || c.length === 0) throw new EstimationInputError(`columns[${i}]`, "must be a non-empty string", "a column name", c);
  });
}

function listNames(names: readonly string[], conjunction = "and"): string {
  if (names.length <= 1) return names.join("");
  return `${names.slice(0, -1).join(", ")} ${conjunction} ${names[names.length - 1]}`;
}
