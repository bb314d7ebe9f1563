/**
 * Robust location and covariance by the Minimum Covariance Determinant (MCD) estimator, computed
 * with FAST-MCD (Rousseeuw & Van Driessen 1999, "A fast algorithm for the Minimum Covariance
 * Determinant estimator", Technometrics 41:212–223), then reweighted.
 *
 * Why: a fraud ring or a data glitch inside the training window drags the classical mean and inflates
 * the classical covariance, so the very payments we want to flag look ordinary (masking). The MCD fits
 * μ and Σ to the h rows whose covariance has the smallest determinant and ignores the rest.
 *
 * Storage: `rows` is an m×n row-major matrix (row i, column j at `rows[i * n + j]`); covariances are
 * n×n row-major. Every covariance here divides by the number of rows it is computed from (h for the raw
 * subset, the number of kept rows for the reweighted estimate), never by that number minus one.
 */

import type { CovarianceEstimate } from "./estimators";
import { regularizedGammaP, chiSquareQuantile } from "./distributions";
import { cholesky, logDetFromCholesky } from "./linalg";
import { selectRank } from "./order-statistics";
import { createRandom, type RandomSource } from "./random";
import { formatForPeople } from "./format-number";

/** Options of {@link fastMcd}; every field is optional. */
export interface McdOptions {
  /** Rows in the raw MCD subset, ⌊(m+n+1)/2⌋ ≤ h ≤ m. Default ⌊(m+n+1)/2⌋ (maximal breakdown point). */
  h?: number;
  /** Seed of the random starts, a non-negative safe integer. Default 0. Same seed → same result. */
  seed?: number;
  /** Random (n+1)-subsets to start from. Default 500 (the paper's choice). */
  starts?: number;
}

/** Everything FAST-MCD computes; the reweighted `mean`/`covariance` are the estimate to use. */
export interface McdResult {
  /** Subset size of the raw MCD. */
  h: number;
  /** Seed that reproduces this result. */
  seed: number;
  /** Best raw h-subset found, 0-based row indices, ascending. */
  support: Int32Array;
  /** ln det of the covariance (divided by h) of the best h-subset, before any consistency factor. */
  rawLogDet: number;
  /** Mean of the best h-subset. */
  rawMean: Float64Array;
  /** Covariance of the best h-subset (divided by h) times `consistencyFactor`; n×n row-major. */
  rawCovariance: Float64Array;
  /**
   * Factor applied to the raw covariance: the consistency factor (h/m) / P(χ²ₙ₊₂ ≤ χ²ₙ quantile at h/m)
   * times the small-sample correction of Pison et al. (2002) ({@link mcdConsistencyFactor} ·
   * {@link mcdSmallSampleFactor}).
   */
  consistencyFactor: number;
  /** Reweighted mean: mean of the rows with weight 1. */
  mean: Float64Array;
  /** Reweighted covariance: divided by the number of kept rows, times the 0.975 consistency factor. */
  covariance: Float64Array;
  /** 1 for rows kept by the reweighting step (raw robust d² ≤ χ²ₙ(0.975)), else 0. */
  weights: Uint8Array;
  /** Number of rows with weight 1. */
  reweightedRows: number;
  /** Squared robust distance of every row under the reweighted mean and covariance. */
  robustDistancesSq: Float64Array;
}

/**
 * A bad input or an impossible fit; `field` names the input, `rule` the requirement it broke.
 * @example
 * try { fastMcd(rows, m, n, { h: 2 }); } catch (e) { if (e instanceof McdError) console.log(e.field, e.rule); }
 * // "options.h" "must be an integer in [⌊(m+n+1)/2⌋, m]"
 */
export class McdError extends Error {
  readonly field: string;
  readonly rule: string;
  constructor(field: string, rule: string, message: string) {
    super(message);
    this.name = "McdError";
    this.field = field;
    this.rule = rule;
  }
}

/**
 * Exact fit: at least h rows (or, at the reweighting step, all kept rows) lie on one hyperplane, so
 * the MCD covariance is singular and no Mahalanobis distance exists. The hyperplane is
 * `normal · x = offset` in model columns (`normal` has unit length).
 * @example
 * // e.normal ≈ [0, 1, 0], e.offset = 1: column 1 equals 1 on e.rowsOnHyperplane rows.
 */
export class ExactFitError extends McdError {
  readonly normal: number[];
  readonly offset: number;
  /** Rows of the data that lie on the hyperplane (within a relative tolerance of 1e-9). */
  readonly rowsOnHyperplane: number;
  constructor(normal: number[], offset: number, rowsOnHyperplane: number, rule: string, message: string) {
    super("rows", rule, message);
    this.name = "ExactFitError";
    this.normal = normal;
    this.offset = offset;
    this.rowsOnHyperplane = rowsOnHyperplane;
  }
}

const DEFAULT_SEED = 0;
const DEFAULT_STARTS = 500;
/** Solutions carried from the random starts to full convergence (the paper keeps 10). */
const KEEP_BEST = 10;
/** C-steps applied to each random start before the best ones are selected (the paper uses 2). */
const START_CSTEPS = 2;
/** Safety cap on C-steps to convergence; the determinant decreases strictly, so it is never reached in practice. */
const MAX_CSTEPS = 200;
/** Nested scheme for large data (as in the paper): at most 5 subsets of 300 rows drawn from at most 1500 rows. */
const MAX_SUBSETS = 5;
const SUBSET_ROWS = 300;
/** The reweighting step keeps rows with raw d² ≤ the χ²ₙ quantile at 0.975 (the paper and robustbase). */
const REWEIGHT_QUANTILE = 0.975;
/**
 * A pivot of the Cholesky factor below this fraction of its diagonal entry means that column is
 * (numerically) a linear combination of the previous ones: 1 − R² < 1e-12.
 */
const SINGULAR_PIVOT_RATIO = 1e-12;
/** Relative tolerance for counting rows on an exact-fit hyperplane. */
const HYPERPLANE_TOLERANCE = 1e-9;

const KNOWN_OPTIONS = new Set(["h", "seed", "starts"]);

/** A contiguous block of rows: the whole data set or a random subsample of it. */
interface Block {
  data: Float64Array;
  count: number;
  /** True for the full data set: a singular h-subset here is an exact fit. */
  isFullData: boolean;
}

/** A fitted h-subset: its mean, Cholesky factor of its covariance (÷ size) and ln det. */
interface Candidate {
  logDet: number;
  mean: Float64Array;
  lower: Float64Array;
  subset: Int32Array;
}

type Factorisation = { ok: true; lower: Float64Array; logDet: number } | { ok: false; normal: Float64Array };

/** Scratch buffers shared by every stage, sized for the full data once; nothing is allocated per row. */
interface Workspace {
  mean: Float64Array;
  cov: Float64Array;
  centered: Float64Array;
  centered2: Float64Array;
  quad: Float64Array;
  inverseLower: Float64Array;
  distances: Float64Array;
  selectScratch: Float64Array;
  current: Int32Array;
  next: Int32Array;
  permutation: Int32Array;
}

/** Shared state of one fit: the full data, h, and the exact-fit rule. */
interface FitContext {
  rows: Float64Array;
  m: number;
  n: number;
  h: number;
  ws: Workspace;
  random: RandomSource;
  /** Hyperplanes already counted on the full data, so repeated singular starts cost O(n) each, not O(m·n). */
  countedPlanes: { normal: Float64Array; offset: number; count: number }[];
}

/**
 * FAST-MCD: robust mean and covariance of `rows` (m×n, row-major), resistant to up to m − h outlying
 * rows, with the reweighting step that restores efficiency.
 *
 * Algorithm (Rousseeuw & Van Driessen 1999):
 * - h defaults to ⌊(m+n+1)/2⌋, the paper's and R robustbase's default (highest breakdown point).
 * - h = m: the classical mean and covariance. n = 1: the paper's exact univariate algorithm (the
 *   contiguous window of h sorted values with the smallest variance).
 * - m ≤ 600 (more precisely m ≤ 2·subset size): `starts` random (n+1)-subsets, each extended by random
 *   rows until its covariance is non-singular; its distances give a first h-subset; two C-steps
 *   (keep the h rows with the smallest distances under the current subset's mean and covariance);
 *   the 10 best are iterated to convergence.
 * - Larger m: the nested scheme. A random subsample of ≤ 1500 rows is split into ≤ 5 subsets of ≈ 300
 *   rows (subsets grow to 2(n+1) rows when n ≥ 150); each subset runs starts/k random starts with
 *   h_sub = ⌈h·size/m⌉ and keeps its 10 best; the ≤ 50 solutions get two C-steps on the merged
 *   subsample (h_merged = ⌈h·size/m⌉); the 10 best are iterated to convergence on the full data.
 *   Each full-data C-step costs O(m·n²) time and O(m) memory.
 * - Raw consistency factor (Croux & Haesbroeck 1999; the form R robustbase uses):
 *   c = (h/m) / P(χ²ₙ₊₂ ≤ q), q = χ²ₙ quantile at h/m, times the small-sample correction of Pison,
 *   Van Aelst & Willems (2002) ({@link mcdSmallSampleFactor}, → 1 as m grows);
 *   rawCovariance = consistencyFactor · S_h (S_h divides by h). The correction matters for which rows
 *   the reweighting keeps on small data (hbk: 61 rows with it, 60 without).
 * - Reweighting: weight 1 for rows whose squared distance under (rawMean, rawCovariance) is
 *   ≤ χ²ₙ(0.975), else 0. `mean`/`covariance` are the mean and covariance of the kept rows (dividing by
 *   their number), the covariance times 0.975 / P(χ²ₙ₊₂ ≤ χ²ₙ(0.975)) (R robustbase uses the kept
 *   fraction instead of 0.975 there, and a second small-sample factor; neither is applied here, so on
 *   small data our reweighted covariance is smaller than robustbase's by a constant factor).
 *   `robustDistancesSq` are under this reweighted estimate.
 *
 * Deterministic: the same rows, options and seed give the same result, bit for bit.
 *
 * @param rows m×n row-major matrix of finite values
 * @param m number of rows (m ≥ n + 1)
 * @param n number of columns (n ≥ 1)
 * @throws McdError naming the field and rule when an input is invalid.
 * @throws ExactFitError when at least h rows lie on one hyperplane (the MCD covariance is singular);
 *   the error carries the hyperplane so the caller can name the dependent columns.
 * @example
 * // 5 rows × 2 columns; the last row is far away.
 * const rows = Float64Array.of(1, 2, 2, 1, 2, 3, 3, 2, 40, 50);
 * const result = fastMcd(rows, 5, 2, { h: 4, seed: 1 });
 * result.robustDistancesSq[4]; // much larger than the others
 */
export function fastMcd(rows: Float64Array, m: number, n: number, options?: McdOptions): McdResult {
  validateShape(rows, m, n);
  const { h, seed, starts } = resolveOptions(options, m, n);

  const ws = createWorkspace(n, m);
  const ctx: FitContext = { rows, m, n, h, ws, random: createRandom(seed), countedPlanes: [] };
  const full: Block = { data: rows, count: m, isFullData: true };

  let best: Candidate;
  if (h === m) {
    best = fitWholeData(ctx);
  } else if (n === 1) {
    best = exactUnivariate(ctx);
  } else {
    const subsetRows = Math.max(SUBSET_ROWS, 2 * (n + 1));
    best = m <= 2 * subsetRows ? searchSmall(ctx, full, starts) : searchNested(ctx, full, starts, subsetRows);
  }
  return finish(ctx, best, seed);
}

/**
 * FAST-MCD wrapped as a {@link CovarianceEstimate}: the reweighted mean and covariance, with the raw
 * MCD facts in `details`.
 * @throws McdError / ExactFitError as {@link fastMcd}.
 * @example
 * const est = robustEstimate(rows, m, n, { seed: 7 });
 * est.details; // { estimator: "robust", h, rawLogDet, consistencyFactor, reweightedRows, seed }
 */
export function robustEstimate(rows: Float64Array, m: number, n: number, options?: McdOptions): CovarianceEstimate {
  const result = fastMcd(rows, m, n, options);
  return {
    mean: result.mean,
    covariance: result.covariance,
    n,
    rows: m,
    details: {
      estimator: "robust",
      h: result.h,
      rawLogDet: result.rawLogDet,
      consistencyFactor: result.consistencyFactor,
      reweightedRows: result.reweightedRows,
      seed: result.seed,
    },
  };
}

/**
 * Consistency factor of a covariance computed from the `fraction` of rows with the smallest
 * Mahalanobis distances of an n-variate normal: fraction / P(χ²ₙ₊₂ ≤ χ²ₙ quantile at fraction)
 * (Croux & Haesbroeck 1999, "Influence function and efficiency of the MCD scatter matrix estimator",
 * J. Multivariate Analysis 71:161–190; the form of R robustbase `.MCDcons`: α / pgamma(qchisq(α, n)/2, n/2 + 1)).
 * Equals 1 at fraction 1.
 * @throws McdError when fraction ∉ (0, 1] or n is not a positive integer.
 * @example mcdConsistencyFactor(0.5, 2) // ≈ 3.2589 = 0.5 / (1 − 0.5·(1 + ln 2))
 */
export function mcdConsistencyFactor(fraction: number, n: number): number {
  if (!(fraction > 0 && fraction <= 1)) {
    throw new McdError("fraction", "must be in (0, 1]", `fraction must be in (0, 1]. Actual: ${fraction}.`);
  }
  if (!Number.isInteger(n) || n < 1) {
    throw new McdError("n", "must be a positive integer", `n must be a positive integer. Actual: ${n}.`);
  }
  if (fraction === 1) return 1;
  const q = chiSquareQuantile(fraction, n);
  // P(χ²ₙ₊₂ ≤ q) = P((n+2)/2, q/2): the regularized lower incomplete gamma, computed directly (no 1 − Q).
  return fraction / regularizedGammaP(n / 2 + 1, q / 2);
}

/**
 * Small-sample correction of the raw MCD covariance (Pison, Van Aelst & Willems 2002, "Small sample
 * corrections for LTS and MCD", Metrika 55:111–123): 1 / f(n, m, α), where f is the authors'
 * simulation fit f = 1 − e^{c₀} / m^{c₁} at α = 0.5 and 0.875, linear in α between them and on to 1
 * at α = 1. α is the robustbase trimming proportion that yields h: h = ⌊2·h₀ − m + 2·(m − h₀)·α⌋ with
 * h₀ = ⌊(m+n+1)/2⌋, so the default h gives α = 0.5. The coefficients (for n ≥ 3 derived from the
 * published pairs at q = 2, 3) are those of the paper, as also used by R robustbase `.MCDcnp2`.
 *
 * The fit is only meaningful for m comfortably above n: when f falls outside (0, 1] (very few rows
 * per column) the correction is not applied and 1 is returned.
 * @throws McdError when n, m or h are not integers with n ≥ 1, m ≥ n + 1 and ⌊(m+n+1)/2⌋ ≤ h ≤ m.
 * @example mcdSmallSampleFactor(3, 75, 39) // ≈ 1.128
 */
export function mcdSmallSampleFactor(n: number, m: number, h: number): number {
  if (!Number.isInteger(n) || n < 1) {
    throw new McdError("n", "must be a positive integer", `n must be a positive integer. Actual: ${String(n)}.`);
  }
  if (!Number.isInteger(m) || m < n + 1) {
    throw new McdError("m", "must be an integer ≥ n + 1", `m must be an integer ≥ n + 1 = ${n + 1}. Actual: ${String(m)}.`);
  }
  const h0 = Math.floor((m + n + 1) / 2);
  if (!Number.isInteger(h) || h < h0 || h > m) {
    throw new McdError("h", "must be an integer in [⌊(m+n+1)/2⌋, m]", `h must be an integer in [${h0}, ${m}]. Actual: ${String(h)}.`);
  }
  const alpha = m === h0 ? 1 : (h - 2 * h0 + m) / (2 * (m - h0));
  let f500: number;
  let f875: number;
  if (n === 1) {
    f500 = 1 - Math.exp(0.262024211897096) / m ** 0.604756680630497;
    f875 = 1 - Math.exp(-0.351584646688712) / m ** 1.01646567502486;
  } else if (n === 2) {
    f500 = 1 - Math.exp(0.673292623522027) / m ** 0.691365864961895;
    f875 = 1 - Math.exp(0.446537815635445) / m ** 1.06690782995919;
  } else {
    f500 = pisonFit(n, m, [-1.42764571687802, 1.26263336932151], [-1.06141115981725, 1.28907991440387]);
    f875 = pisonFit(n, m, [-0.455179464070565, 1.11192541278794], [-0.294241208320834, 1.09649329149811]);
  }
  const f = alpha <= 0.875 ? f500 + ((f875 - f500) / 0.375) * (alpha - 0.5) : f875 + ((1 - f875) / 0.125) * (alpha - 0.875);
  return f > 0 && f <= 1 ? 1 / f : 1;
}

/**
 * Pison et al.'s fit for n ≥ 3: the published (a_q, b_q) at q = 2, 3 give ln(−a_q / n^{b_q}) =
 * c₀ − c₁·ln(q·n²); solving the two equations gives c₀, c₁, and f = 1 − e^{c₀} / m^{c₁}.
 */
function pisonFit(n: number, m: number, [a2, b2]: [number, number], [a3, b3]: [number, number]): number {
  const y2 = Math.log(-a2 / n ** b2);
  const y3 = Math.log(-a3 / n ** b3);
  const x2 = -Math.log(2 * n * n);
  const x3 = -Math.log(3 * n * n);
  const c1 = (y2 - y3) / (x2 - x3);
  const c0 = y2 - c1 * x2;
  return 1 - Math.exp(c0) / m ** c1;
}

// ───────────────────────────── validation ─────────────────────────────

function validateShape(rows: Float64Array, m: number, n: number): void {
  if (!Number.isInteger(n) || n < 1) {
    throw new McdError("n", "must be a positive integer", `n (number of columns) must be a positive integer. Actual: ${String(n)}.`);
  }
  if (!Number.isInteger(m) || m < 1) {
    throw new McdError("m", "must be a positive integer", `m (number of rows) must be a positive integer. Actual: ${String(m)}.`);
  }
  if (m < n + 1) {
    throw new McdError(
      "m",
      "must be at least n + 1",
      `m (number of rows) must be at least n + 1 = ${n + 1} for n = ${n} columns, so that a non-singular covariance exists. Actual: ${m}.`,
    );
  }
  if (!(rows instanceof Float64Array)) {
    throw new McdError("rows", "must be a Float64Array", `rows must be a Float64Array (m×n row-major). Actual: ${describe(rows)}.`);
  }
  if (rows.length !== m * n) {
    throw new McdError("rows", "length must equal m·n", `rows must hold m·n = ${m}·${n} = ${m * n} values. Actual: ${rows.length}.`);
  }
  for (let k = 0; k < rows.length; k++) {
    const v = rows[k];
    if (!Number.isFinite(v)) {
      const i = Math.floor(k / n);
      throw new McdError("rows", "every value must be finite", `rows[${k}] (row ${i}, column ${k - i * n}) must be a finite number. Actual: ${v}.`);
    }
  }
}

function resolveOptions(options: McdOptions | undefined, m: number, n: number): { h: number; seed: number; starts: number } {
  if (options !== undefined && (options === null || typeof options !== "object")) {
    throw new McdError("options", "must be an object", `options must be an object or undefined. Actual: ${describe(options)}.`);
  }
  const opts = options ?? {};
  for (const key of Object.keys(opts)) {
    if (!KNOWN_OPTIONS.has(key)) {
      throw new McdError(`options.${key}`, "unknown option", `options.${key} is not an MCD option. Expected one of: h, seed, starts.`);
    }
  }
  const hMin = Math.floor((m + n + 1) / 2);
  const h = opts.h ?? hMin;
  if (!Number.isInteger(h) || h < hMin || h > m) {
    throw new McdError(
      "options.h",
      "must be an integer in [⌊(m+n+1)/2⌋, m]",
      `options.h must be an integer in [⌊(m+n+1)/2⌋, m] = [${hMin}, ${m}] for m = ${m}, n = ${n} (fewer rows would let outliers outnumber the fit). Actual: ${String(h)}.`,
    );
  }
  const seed = opts.seed ?? DEFAULT_SEED;
  if (!Number.isInteger(seed) || seed < 0 || seed > Number.MAX_SAFE_INTEGER) {
    throw new McdError("options.seed", "must be a non-negative safe integer", `options.seed must be an integer in [0, ${Number.MAX_SAFE_INTEGER}]. Actual: ${String(seed)}.`);
  }
  const starts = opts.starts ?? DEFAULT_STARTS;
  if (!Number.isInteger(starts) || starts < 1 || starts > 1_000_000) {
    throw new McdError("options.starts", "must be an integer in [1, 1000000]", `options.starts must be an integer in [1, 1000000]. Actual: ${String(starts)}.`);
  }
  return { h, seed, starts };
}

function describe(value: unknown): string {
  if (value === null) return "null";
  if (typeof value === "object") return (value as object).constructor?.name ?? "object";
  return `${typeof value} ${String(value)}`;
}

// ───────────────────────────── search strategies ─────────────────────────────

/** h = m: the MCD is the classical estimate of all rows. */
function fitWholeData(ctx: FitContext): Candidate {
  const { ws, m } = ctx;
  const all = new Int32Array(m);
  for (let i = 0; i < m; i++) all[i] = i;
  const f = fitSubset(ctx.rows, ctx.n, all, m, ws);
  if (!f.ok) throw exactFit(ctx, f.normal, ws.mean);
  return { logDet: f.logDet, mean: ws.mean.slice(), lower: f.lower, subset: all };
}

/**
 * n = 1: the exact univariate MCD used by FAST-MCD for one column (after Rousseeuw & Leroy 1987):
 * among the m − h + 1 windows of h consecutive sorted values, the one with the smallest variance.
 */
function exactUnivariate(ctx: FitContext): Candidate {
  const { rows: x, m, h, ws } = ctx;
  const order = new Int32Array(m);
  for (let i = 0; i < m; i++) order[i] = i;
  order.sort((a, b) => x[a] - x[b] || a - b);
  // Centre on the median so the running sums of squares do not cancel catastrophically.
  const reference = x[order[m >> 1]];
  let sum = 0;
  let sumSq = 0;
  for (let k = 0; k < h; k++) {
    const y = x[order[k]] - reference;
    sum += y;
    sumSq += y * y;
  }
  let bestStart = 0;
  let bestScatter = sumSq - (sum * sum) / h;
  for (let start = 1; start + h <= m; start++) {
    const out = x[order[start - 1]] - reference;
    const inn = x[order[start + h - 1]] - reference;
    sum += inn - out;
    sumSq += inn * inn - out * out;
    const scatter = sumSq - (sum * sum) / h;
    if (scatter < bestScatter) {
      bestScatter = scatter;
      bestStart = start;
    }
  }
  const subset = order.slice(bestStart, bestStart + h).sort();
  const f = fitSubset(x, 1, subset, h, ws);
  if (!f.ok) throw exactFit(ctx, f.normal, ws.mean);
  return { logDet: f.logDet, mean: ws.mean.slice(), lower: f.lower, subset };
}

/** Small data: random starts on the full data, the 10 best iterated to convergence. */
function searchSmall(ctx: FitContext, full: Block, starts: number): Candidate {
  const shortlist = runStarts(ctx, full, ctx.h, starts);
  return convergeOnFullData(ctx, full, shortlist);
}

/** Large data: the paper's nested subsample scheme. */
function searchNested(ctx: FitContext, full: Block, starts: number, subsetRows: number): Candidate {
  const { rows, m, n, h, random } = ctx;
  const pooledRows = Math.min(m, MAX_SUBSETS * subsetRows);
  const subsets = Math.max(1, Math.min(MAX_SUBSETS, Math.floor(pooledRows / subsetRows)));

  // A uniformly random sample of `pooledRows` rows in random order (partial Fisher–Yates), copied
  // into one contiguous block whose consecutive slices are the subsets.
  const chosen = new Int32Array(m);
  for (let i = 0; i < m; i++) chosen[i] = i;
  for (let k = 0; k < pooledRows; k++) {
    const j = k + random.int(m - k);
    const t = chosen[k];
    chosen[k] = chosen[j];
    chosen[j] = t;
  }
  const pooled = new Float64Array(pooledRows * n);
  for (let k = 0; k < pooledRows; k++) pooled.set(rows.subarray(chosen[k] * n, chosen[k] * n + n), k * n);

  const pooledCandidates: Candidate[] = [];
  const baseSize = Math.floor(pooledRows / subsets);
  const extraRows = pooledRows - baseSize * subsets;
  let offset = 0;
  for (let b = 0; b < subsets; b++) {
    const size = baseSize + (b < extraRows ? 1 : 0);
    const block: Block = { data: pooled.subarray(offset * n, (offset + size) * n), count: size, isFullData: false };
    const hSub = scaledH(h, m, size, n);
    const blockStarts = Math.max(1, Math.floor(starts / subsets) + (b < starts % subsets ? 1 : 0));
    pooledCandidates.push(...runStarts(ctx, block, hSub, blockStarts));
    offset += size;
  }
  if (pooledCandidates.length === 0) throw noStartFound(ctx);

  // Two C-steps for every subset solution on the merged subsample; keep the 10 best.
  // Not flagged as full data even when pooledRows = m: a singular subset there is still judged by
  // counting the rows of the real data on its hyperplane (handleSingular).
  const merged: Block = { data: pooled, count: pooledRows, isFullData: false };
  const hMerged = scaledH(h, m, pooledRows, n);
  const mergedBest: Candidate[] = [];
  for (const candidate of pooledCandidates) {
    const refined = continueFrom(ctx, merged, hMerged, candidate, START_CSTEPS);
    if (refined) keepBest(mergedBest, refined, KEEP_BEST);
  }
  if (mergedBest.length === 0) throw noStartFound(ctx);
  return convergeOnFullData(ctx, full, mergedBest);
}

/** h for a subsample of `size` rows: the same fraction h/m, at least n + 1 and at most `size`. */
function scaledH(h: number, m: number, size: number, n: number): number {
  return Math.min(size, Math.max(n + 1, Math.ceil((h * size) / m)));
}

/**
 * Random starts on one block: an (n+1)-subset, grown one random row at a time until its covariance
 * is non-singular, gives a first h-subset by its distances; two C-steps follow. Returns the 10 best.
 */
function runStarts(ctx: FitContext, block: Block, hBlock: number, starts: number): Candidate[] {
  const { n, ws, random } = ctx;
  const perm = ws.permutation;
  for (let i = 0; i < block.count; i++) perm[i] = i;
  const best: Candidate[] = [];
  for (let s = 0; s < starts; s++) {
    // Partial Fisher–Yates: perm stays a permutation, so its prefix is a uniform random subset.
    let size = 0;
    let f: Factorisation;
    for (;;) {
      const target = size === 0 ? n + 1 : size + 1;
      while (size < target) {
        const j = size + random.int(block.count - size);
        const t = perm[size];
        perm[size] = perm[j];
        perm[j] = t;
        size++;
      }
      f = fitSubset(block.data, n, perm, size, ws);
      if (f.ok || size === block.count) break;
    }
    if (!f.ok) {
      // The whole block lies on a hyperplane.
      handleSingular(ctx, block, f.normal, ws.mean);
      continue;
    }
    distancesSq(block.data, block.count, n, ws.mean, f.lower, ws.distances, ws);
    selectSmallest(ws.distances, block.count, hBlock, ws.current, ws.selectScratch);
    const candidate = cSteps(ctx, block, hBlock, START_CSTEPS);
    if (candidate) keepBest(best, candidate, KEEP_BEST);
  }
  return best;
}

/** Iterates each shortlisted solution to convergence on the full data; returns the best. */
function convergeOnFullData(ctx: FitContext, full: Block, shortlist: Candidate[]): Candidate {
  let best: Candidate | null = null;
  for (const candidate of shortlist) {
    const converged = continueFrom(ctx, full, ctx.h, candidate, MAX_CSTEPS);
    if (converged && (best === null || converged.logDet < best.logDet)) best = converged;
  }
  if (best === null) throw noStartFound(ctx);
  return best;
}

/** Takes the h rows of `block` closest under a candidate's (mean, covariance), then C-steps. */
function continueFrom(ctx: FitContext, block: Block, hBlock: number, from: Candidate, steps: number): Candidate | null {
  const { n, ws } = ctx;
  distancesSq(block.data, block.count, n, from.mean, from.lower, ws.distances, ws);
  selectSmallest(ws.distances, block.count, hBlock, ws.current, ws.selectScratch);
  return cSteps(ctx, block, hBlock, steps);
}

/**
 * C-steps from the h-subset in `ws.current` (Rousseeuw & Van Driessen 1999, Theorem 1: the
 * determinant never increases). Stops after `steps` steps, when the subset repeats, or when the
 * determinant stops decreasing. Returns null if a singular subset was skipped (subsample only).
 */
function cSteps(ctx: FitContext, block: Block, hBlock: number, steps: number): Candidate | null {
  const { n, ws } = ctx;
  let f = fitSubset(block.data, n, ws.current, hBlock, ws);
  if (!f.ok) {
    handleSingular(ctx, block, f.normal, ws.mean);
    return null;
  }
  let lower = f.lower;
  let logDet = f.logDet;
  let mean = ws.mean.slice();
  for (let step = 0; step < steps; step++) {
    distancesSq(block.data, block.count, n, mean, lower, ws.distances, ws);
    selectSmallest(ws.distances, block.count, hBlock, ws.next, ws.selectScratch);
    if (sameSubset(ws.current, ws.next, hBlock)) break;
    f = fitSubset(block.data, n, ws.next, hBlock, ws);
    if (!f.ok) {
      handleSingular(ctx, block, f.normal, ws.mean);
      return null;
    }
    if (!(f.logDet < logDet)) break;
    lower = f.lower;
    logDet = f.logDet;
    mean = ws.mean.slice();
    const t = ws.current;
    ws.current = ws.next;
    ws.next = t;
  }
  return { logDet, mean, lower, subset: ws.current.slice(0, hBlock) };
}

/** Inserts into a list of at most `keep` candidates sorted by ln det, skipping duplicates. */
function keepBest(list: Candidate[], candidate: Candidate, keep: number): void {
  if (list.length === keep && !(candidate.logDet < list[keep - 1].logDet)) return;
  for (const other of list) {
    if (Math.abs(other.logDet - candidate.logDet) <= 1e-10 * Math.max(1, Math.abs(other.logDet)) && sameSubset(other.subset, candidate.subset, candidate.subset.length)) {
      return;
    }
  }
  let at = list.length;
  while (at > 0 && candidate.logDet < list[at - 1].logDet) at--;
  list.splice(at, 0, candidate);
  if (list.length > keep) list.pop();
}

function sameSubset(a: Int32Array, b: Int32Array, size: number): boolean {
  if (a.length < size || b.length < size) return false;
  for (let i = 0; i < size; i++) if (a[i] !== b[i]) return false;
  return true;
}

// ───────────────────────────── final estimate ─────────────────────────────

/** Raw consistency, reweighting and the final distances. */
function finish(ctx: FitContext, best: Candidate, seed: number): McdResult {
  const { rows, m, n, h, ws } = ctx;
  const support = best.subset.slice(0, h);
  // Recompute the raw moments from the support so the reported numbers come from one clean pass.
  const raw = fitSubset(rows, n, support, h, ws);
  if (!raw.ok) throw exactFit(ctx, raw.normal, ws.mean);
  const rawMean = ws.mean.slice();
  const consistencyFactor = mcdConsistencyFactor(h / m, n) * mcdSmallSampleFactor(n, m, h);
  const rawCovariance = new Float64Array(n * n);
  for (let k = 0; k < n * n; k++) rawCovariance[k] = consistencyFactor * ws.cov[k];

  // Distances under c·S_h are the distances under S_h divided by c.
  const cutoff = chiSquareQuantile(REWEIGHT_QUANTILE, n);
  distancesSq(rows, m, n, rawMean, raw.lower, ws.distances, ws);
  const weights = new Uint8Array(m);
  const kept = new Int32Array(m);
  let reweightedRows = 0;
  for (let i = 0; i < m; i++) {
    if (ws.distances[i] / consistencyFactor <= cutoff) {
      weights[i] = 1;
      kept[reweightedRows++] = i;
    }
  }
  const reweighted = fitSubset(rows, n, kept, reweightedRows, ws);
  if (!reweighted.ok) throw exactFit(ctx, reweighted.normal, ws.mean, reweightedRows);
  const mean = ws.mean.slice();
  const reweightFactor = mcdConsistencyFactor(REWEIGHT_QUANTILE, n);
  const covariance = new Float64Array(n * n);
  for (let k = 0; k < n * n; k++) covariance[k] = reweightFactor * ws.cov[k];
  const finalFactor = cholesky(covariance, n);
  if (!finalFactor.ok) {
    throw new McdError("rows", "reweighted covariance must be positive definite", "rows: the reweighted covariance is not positive definite.");
  }
  const robustDistancesSq = new Float64Array(m);
  distancesSq(rows, m, n, mean, finalFactor.lower, robustDistancesSq, ws);

  return {
    h,
    seed,
    support,
    rawLogDet: raw.logDet,
    rawMean,
    rawCovariance,
    consistencyFactor,
    mean,
    covariance,
    weights,
    reweightedRows,
    robustDistancesSq,
  };
}

// ───────────────────────────── exact fit ─────────────────────────────

/**
 * A singular subset covariance. On the full data (or when ≥ h of all rows lie on the hyperplane)
 * this is an exact fit and stops the fit; inside a subsample it only discards that start.
 */
function handleSingular(ctx: FitContext, block: Block, normal: Float64Array, mean: Float64Array): void {
  const onPlane = countOnHyperplane(ctx, normal, mean);
  if (block.isFullData || onPlane >= ctx.h) throw exactFit(ctx, normal, mean, undefined, onPlane);
}

function exactFit(ctx: FitContext, normal: Float64Array, mean: Float64Array, keptRows?: number, onPlane?: number): ExactFitError {
  const { m, n, h } = ctx;
  let offset = 0;
  for (let j = 0; j < n; j++) offset += normal[j] * mean[j];
  const count = onPlane ?? countOnHyperplane(ctx, normal, mean);
  const equation = formatHyperplane(normal, offset);
  const normalList = Array.from(normal);
  if (keptRows !== undefined) {
    return new ExactFitError(
      normalList,
      offset,
      count,
      "the rows kept by the reweighting step must not lie on one hyperplane",
      `rows: the ${keptRows} rows kept by the MCD reweighting step lie on the hyperplane ${equation} (${count} of ${m} rows lie on it), so their covariance is singular. Remove or combine the dependent columns, or use the classical or shrinkage estimator.`,
    );
  }
  return new ExactFitError(
    normalList,
    offset,
    count,
    "fewer than h rows may lie on one hyperplane (exact fit)",
    `rows: exact fit — ${count} of ${m} rows lie on the hyperplane ${equation}, and the MCD with h = ${h} needs fewer than h rows on any hyperplane (its covariance would be singular). Remove or combine the constant or dependent columns, raise h, or use the classical or shrinkage estimator.`,
  );
}

function noStartFound(ctx: FitContext): McdError {
  return new McdError(
    "rows",
    "a random start must have a non-singular covariance",
    `rows: no random start of FAST-MCD had a non-singular covariance in its subsample (m = ${ctx.m}, n = ${ctx.n}); the data are nearly degenerate. Use the classical or shrinkage estimator.`,
  );
}

/**
 * Rows with |normal·x − offset| ≤ 1e-9 · (Σ|normal_j·x_j| + |offset|). Remembers the planes it has
 * counted: subsamples of data with many tied rows meet the same plane at start after start.
 */
function countOnHyperplane(ctx: FitContext, normal: Float64Array, mean: Float64Array): number {
  const { rows, m, n } = ctx;
  let offset = 0;
  for (let j = 0; j < n; j++) offset += normal[j] * mean[j];
  for (const plane of ctx.countedPlanes) {
    let dot = 0;
    for (let j = 0; j < n; j++) dot += plane.normal[j] * normal[j];
    const sameOffset = Math.abs(Math.sign(dot) * offset - plane.offset) <= HYPERPLANE_TOLERANCE * (1 + Math.abs(offset));
    if (Math.abs(dot) >= 1 - HYPERPLANE_TOLERANCE && sameOffset) return plane.count;
  }
  let count = 0;
  for (let i = 0; i < m; i++) {
    const base = i * n;
    let dot = 0;
    let scale = Math.abs(offset);
    for (let j = 0; j < n; j++) {
      const term = normal[j] * rows[base + j];
      dot += term;
      scale += Math.abs(term);
    }
    if (Math.abs(dot - offset) <= HYPERPLANE_TOLERANCE * scale) count++;
  }
  ctx.countedPlanes.push({ normal: normal.slice(), offset, count });
  return count;
}

function formatHyperplane(normal: Float64Array, offset: number): string {
  const terms: string[] = [];
  for (let j = 0; j < normal.length; j++) {
    const c = normal[j];
    if (Math.abs(c) < 1e-8) continue;
    const magnitude = Math.abs(c).toPrecision(4);
    const sign = c < 0 ? "−" : "+";
    terms.push(terms.length === 0 ? `${c < 0 ? "−" : ""}${magnitude}·x[${j}]` : `${sign} ${magnitude}·x[${j}]`);
  }
  return `${terms.join(" ")} = ${formatForPeople(offset, 6)} (x[j] = column j)`;
}

// ───────────────────────────── kernels ─────────────────────────────

function createWorkspace(n: number, m: number): Workspace {
  return {
    mean: new Float64Array(n),
    cov: new Float64Array(n * n),
    centered: new Float64Array(n),
    centered2: new Float64Array(n),
    quad: new Float64Array(4 * n),
    inverseLower: new Float64Array(n * n),
    distances: new Float64Array(m),
    selectScratch: new Float64Array(m),
    current: new Int32Array(m),
    next: new Int32Array(m),
    permutation: new Int32Array(m),
  };
}

/**
 * Mean and covariance (divided by `size`) of the rows `subset[0..size)` of `data` into `ws.mean` and
 * `ws.cov` (two passes: centring first keeps the sums of products well conditioned), then a Cholesky
 * factorisation. A pivot below 1e-12 of its diagonal entry counts as singular; the returned `normal`
 * then spans the (numerical) null direction.
 */
function fitSubset(data: Float64Array, n: number, subset: Int32Array, size: number, ws: Workspace): Factorisation {
  const { mean, cov, centered } = ws;
  mean.fill(0);
  for (let r = 0; r < size; r++) {
    const base = subset[r] * n;
    for (let j = 0; j < n; j++) mean[j] += data[base + j];
  }
  for (let j = 0; j < n; j++) mean[j] /= size;
  cov.fill(0);
  // Four rows per sweep over the lower triangle: a quarter of the read-modify-writes of `cov`.
  const quad = ws.quad;
  const n2 = 2 * n;
  const n3 = 3 * n;
  let r = 0;
  for (; r + 3 < size; r += 4) {
    for (let q = 0; q < 4; q++) {
      const base = subset[r + q] * n;
      const at = q * n;
      for (let j = 0; j < n; j++) quad[at + j] = data[base + j] - mean[j];
    }
    // Lower triangle only, row by row, so the writes are contiguous.
    for (let i = 0; i < n; i++) {
      const a0 = quad[i];
      const a1 = quad[n + i];
      const a2 = quad[n2 + i];
      const a3 = quad[n3 + i];
      const row = i * n;
      for (let j = 0; j <= i; j++) {
        cov[row + j] += a0 * quad[j] + a1 * quad[n + j] + a2 * quad[n2 + j] + a3 * quad[n3 + j];
      }
    }
  }
  for (; r < size; r++) {
    const base = subset[r] * n;
    for (let j = 0; j < n; j++) centered[j] = data[base + j] - mean[j];
    for (let i = 0; i < n; i++) {
      const ci = centered[i];
      const row = i * n;
      for (let j = 0; j <= i; j++) cov[row + j] += ci * centered[j];
    }
  }
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      const v = cov[i * n + j] / size;
      cov[i * n + j] = v;
      cov[j * n + i] = v;
    }
  }
  const chol = cholesky(cov, n);
  let failedAt = chol.failedAt;
  if (chol.ok) {
    for (let i = 0; i < n; i++) {
      const pivot = chol.lower[i * n + i];
      if (pivot * pivot <= SINGULAR_PIVOT_RATIO * cov[i * n + i]) {
        failedAt = i;
        break;
      }
    }
  }
  if (failedAt < 0) return { ok: true, lower: chol.lower, logDet: logDetFromCholesky(chol.lower, n) };
  return { ok: false, normal: nullDirection(chol.lower, n, failedAt) };
}

/**
 * Unit vector v with Σ·v ≈ 0 when the Cholesky pivot k vanished: v = (w, 1, 0…) with L₁₁ᵀ·w = −l,
 * where l is row k of L left of the diagonal (column k is then the combination −w of the earlier ones).
 */
function nullDirection(lower: Float64Array, n: number, k: number): Float64Array {
  const v = new Float64Array(n);
  v[k] = 1;
  for (let j = k - 1; j >= 0; j--) {
    let s = -lower[k * n + j];
    for (let i = j + 1; i < k; i++) s -= lower[i * n + j] * v[i];
    v[j] = s / lower[j * n + j];
  }
  let norm = 0;
  for (let j = 0; j < n; j++) norm += v[j] * v[j];
  norm = Math.sqrt(norm);
  for (let j = 0; j < n; j++) v[j] /= norm;
  return v;
}

/**
 * Squared Mahalanobis distances of the first `count` rows of `data` under (mean, L·Lᵀ):
 * z = L⁻¹·(x − μ), d² = ‖z‖². L⁻¹ is formed once per call (O(n³)), so each row is a triangular
 * matrix–vector product whose n dot products are independent (unlike forward substitution, which
 * waits on every previous z_k); rows go in pairs so each entry of L⁻¹ is loaded once for two rows.
 * O(count·n²/2); no allocation.
 */
function distancesSq(data: Float64Array, count: number, n: number, mean: Float64Array, lower: Float64Array, out: Float64Array, ws: Workspace): void {
  const li = ws.inverseLower;
  invertLower(lower, n, li);
  const c0 = ws.centered;
  const c1 = ws.centered2;
  let r = 0;
  for (; r + 1 < count; r += 2) {
    const b0 = r * n;
    const b1 = b0 + n;
    for (let j = 0; j < n; j++) {
      c0[j] = data[b0 + j] - mean[j];
      c1[j] = data[b1 + j] - mean[j];
    }
    let acc0 = 0;
    let acc1 = 0;
    for (let i = 0; i < n; i++) {
      const row = i * n;
      let s0 = 0;
      let s1 = 0;
      for (let k = 0; k <= i; k++) {
        const l = li[row + k];
        s0 += l * c0[k];
        s1 += l * c1[k];
      }
      acc0 += s0 * s0;
      acc1 += s1 * s1;
    }
    out[r] = acc0;
    out[r + 1] = acc1;
  }
  if (r < count) {
    const b0 = r * n;
    for (let j = 0; j < n; j++) c0[j] = data[b0 + j] - mean[j];
    let acc0 = 0;
    for (let i = 0; i < n; i++) {
      const row = i * n;
      let s0 = 0;
      for (let k = 0; k <= i; k++) s0 += li[row + k] * c0[k];
      acc0 += s0 * s0;
    }
    out[r] = acc0;
  }
}

/** L⁻¹ of a lower-triangular L with positive diagonal, into `out` (lower triangular, row-major). */
function invertLower(lower: Float64Array, n: number, out: Float64Array): void {
  out.fill(0);
  for (let i = 0; i < n; i++) {
    const dInv = 1 / lower[i * n + i];
    out[i * n + i] = dInv;
    for (let j = 0; j < i; j++) {
      let sum = 0;
      for (let k = j; k < i; k++) sum -= lower[i * n + k] * out[k * n + j];
      out[i * n + j] = sum * dInv;
    }
  }
}

/**
 * Writes the indices of the `h` smallest `values[0..count)` into `out[0..h)`, ascending by index.
 * Ties at the threshold go to the lowest indices, so the result is deterministic. O(count) expected.
 */
function selectSmallest(values: Float64Array, count: number, h: number, out: Int32Array, scratch: Float64Array): void {
  for (let i = 0; i < count; i++) scratch[i] = values[i];
  const threshold = selectRank(scratch, h - 1, count);
  let below = 0;
  for (let i = 0; i < count; i++) if (values[i] < threshold) below++;
  let tiesLeft = h - below;
  let w = 0;
  for (let i = 0; i < count; i++) {
    const v = values[i];
    if (v < threshold) {
      out[w++] = i;
    } else if (v === threshold && tiesLeft > 0) {
      out[w++] = i;
      tiesLeft--;
    }
  }
}
