/**
 * Streaming first and second moments: count, mean and co-moment matrix in one pass over the rows,
 * with shards that merge exactly. Memory is O(n²) for n columns whatever the number of rows.
 *
 * Maths (m rows seen so far, x̄ their mean, C = Σ (x − x̄)(x − x̄)ᵀ the co-moment):
 * - Welford (1962), "Note on a method for calculating corrected sums of squares and products",
 *   Technometrics 4(3):419–420, in its multivariate form: with δ = x − x̄_old,
 *   x̄_new = x̄_old + δ/m and C_new = C_old + ((m−1)/m)·δδᵀ.
 * - Chan, Golub & LeVeque (1979), "Updating formulae and a pairwise algorithm for computing sample
 *   variances": two shards A, B with δ = x̄_B − x̄_A merge as
 *   x̄ = x̄_A + δ·m_B/m and C = C_A + C_B + δδᵀ·m_A·m_B/m, exactly (no approximation).
 *
 * Covariance denominators: `covariance("m")` = C/m is the maximum-likelihood estimate (the default);
 * `covariance("m-1")` = C/(m−1) is the unbiased sample covariance.
 */

import { InputError } from "./input-error";

/** A bad argument, named by `field` and the `rule` it broke (what was expected and what came). */
export class EstimationInputError extends InputError {
  /**
   * @param field  the argument or property at fault
   * @param rule   the rule it broke
   * @param expected what was expected (optional, printed as `Expected: …`)
   * @param actual what came (optional, printed as `Actual: …`)
   */
  constructor(field: string, rule: string, expected?: unknown, actual?: unknown) {
    const detail = expected === undefined ? "" : ` Expected: ${String(expected)}. Actual: ${describe(actual)}.`;
    super(field, rule, `${field}: ${rule}.${detail}`);
  }
}

function describe(value: unknown): string {
  if (typeof value === "string") return JSON.stringify(value);
  if (Array.isArray(value)) return `an array of ${value.length}`;
  if (value === null) return "null";
  if (typeof value === "object") return "an object";
  return String(value);
}

/** Plain-JSON form of a {@link MomentAccumulator}, so shards can be stored and merged later. */
export interface MomentSnapshot {
  /** Number of columns. */
  n: number;
  /** Rows accumulated (m). */
  count: number;
  /** Running mean, length n. */
  mean: number[];
  /** Co-moment Σ (x−x̄)(x−x̄)ᵀ, n×n row-major, length n². Not divided by anything. */
  comoment: number[];
}

/** Accepted covariance denominators: m (maximum likelihood) or m−1 (unbiased). */
export type CovarianceDenominator = "m" | "m-1";

/**
 * Checks a block of m rows stored row-major for an accumulator of n columns: m a whole number
 * ≥ 0 and exactly m·n values.
 *
 * @throws {EstimationInputError} naming `m` or `rows` and what was expected.
 * @example checkRowBlock(Float64Array.of(1, 2, 3, 4), 2, 2) // passes
 */
export function checkRowBlock(rows: ArrayLike<number>, m: number, n: number): void {
  if (!Number.isInteger(m) || m < 0) throw new EstimationInputError("m", "must be an integer ≥ 0 (the number of rows)", "an integer ≥ 0", m);
  if (rows.length !== m * n) {
    throw new EstimationInputError("rows", `must hold m × n = ${m} × ${n} values`, m * n, rows.length);
  }
}

/**
 * One-pass accumulator of count, mean and co-moment matrix (Welford 1962), mergeable across shards
 * (Chan, Golub & LeVeque 1979). `push` allocates nothing.
 *
 * @example
 * const acc = new MomentAccumulator(2);
 * acc.push([1, 2]); acc.push([3, 4]); acc.push([5, 9]);
 * acc.covariance("m-1"); // [4, 7, 7, 13]
 */
export class MomentAccumulator {
  /** Number of columns. */
  readonly n: number;
  /** Rows accumulated so far (m). */
  count = 0;
  /** Running mean x̄, length n. */
  mean: Float64Array;
  /** Co-moment Σ (x−x̄)(x−x̄)ᵀ, n×n row-major, kept exactly symmetric (Welford 1962). */
  comoment: Float64Array;
  /** Scratch for δ = x − x̄_old, reused by every push so the hot loop never allocates. */
  private readonly delta: Float64Array;

  /**
   * @param n number of columns, an integer ≥ 1
   * @throws {EstimationInputError} when n is not an integer ≥ 1
   */
  constructor(n: number) {
    if (!Number.isInteger(n) || n < 1) {
      throw new EstimationInputError("n", "must be an integer ≥ 1 (the number of columns)", "an integer ≥ 1", n);
    }
    this.n = n;
    this.mean = new Float64Array(n);
    this.comoment = new Float64Array(n * n);
    this.delta = new Float64Array(n);
  }

  /**
   * Adds one row (length n, finite values). O(n²) time, no allocation.
   * @throws {EstimationInputError} on a wrong length or a non-finite value; the accumulator is unchanged
   * @example acc.push(Float64Array.of(12.5, 3, 0.2))
   */
  push(x: ArrayLike<number>): void {
    if (x.length !== this.n) throw new EstimationInputError("x", "must have one value per column", this.n, x.length);
    this.pushAt(x, 0, -1);
  }

  /** Welford update with the row starting at `source[offset]`; `row` (−1 for a lone vector) names it in errors. */
  private pushAt(source: ArrayLike<number>, offset: number, row: number): void {
    const n = this.n;
    const delta = this.delta;
    const mean = this.mean;
    // Validate before touching state so a bad row cannot leave a half-updated accumulator.
    for (let i = 0; i < n; i++) {
      const v = source[offset + i];
      if (!Number.isFinite(v)) {
        const field = row < 0 ? `x[${i}]` : `rows[${offset + i}] (row ${row}, column ${i})`;
        throw new EstimationInputError(field, "must be a finite number", "a finite number", v);
      }
      delta[i] = v - mean[i];
    }
    const m = ++this.count;
    const invM = 1 / m;
    for (let i = 0; i < n; i++) mean[i] += delta[i] * invM;
    // ((m−1)/m)·δδᵀ, applied to the lower triangle and mirrored so C stays exactly symmetric.
    const f = (m - 1) * invM;
    const c = this.comoment;
    for (let i = 0; i < n; i++) {
      const fi = f * delta[i];
      if (fi === 0) continue;
      const base = i * n;
      for (let j = 0; j < i; j++) {
        const v = fi * delta[j];
        c[base + j] += v;
        c[j * n + i] += v;
      }
      c[base + i] += fi * delta[i];
    }
  }

  /**
   * Adds m rows stored row-major in `rows` (length m·n).
   * @throws {EstimationInputError} when the length is not m·n or a value is not finite
   * @example acc.pushRows(Float64Array.of(1, 2, 3, 4), 2)
   */
  pushRows(rows: ArrayLike<number>, m: number): this {
    checkRowBlock(rows, m, this.n);
    for (let r = 0; r < m; r++) this.pushAt(rows, r * this.n, r);
    return this;
  }

  /**
   * Adds m rows given column by column (`columns[i][r]` is column i of row r; each array holds at
   * least m values): the block's mean and its co-moment around that mean in two passes over the
   * columns (dot products over contiguous memory, much faster than m rank-one updates), then
   * merged exactly (Chan, Golub & LeVeque 1979). Values must be finite (not checked: the caller
   * validates rows as it reads them). `scratch` (length ≥ m·n) avoids an allocation per block.
   * @throws {EstimationInputError} when the number of columns differs from n
   * @example acc.pushColumns([Float64Array.of(1, 3), Float64Array.of(2, 4)], 2) // rows (1, 2), (3, 4)
   */
  pushColumns(columns: readonly Float64Array[], m: number, scratch?: Float64Array): this {
    const n = this.n;
    if (columns.length !== n) throw new EstimationInputError("columns", "must hold one array per column", n, columns.length);
    if (m === 0) return this;
    const block = new MomentAccumulator(n);
    const centred = scratch !== undefined && scratch.length >= m * n ? scratch : new Float64Array(m * n);
    for (let i = 0; i < n; i++) {
      const column = columns[i];
      let sum = 0;
      for (let r = 0; r < m; r++) sum += column[r];
      const mean = sum / m;
      block.mean[i] = mean;
      const base = i * m;
      for (let r = 0; r < m; r++) centred[base + r] = column[r] - mean;
    }
    const c = block.comoment;
    // Two rows by two columns of the co-moment matrix at a time: four values loaded per four
    // products instead of two per one. Each dot product still sums over r in order, so the
    // result is the same to the last bit as one dot product at a time.
    for (let i = 0; i < n; i += 2) {
      const i1 = Math.min(i + 1, n - 1);
      const bi = i * m;
      const bi1 = i1 * m;
      for (let j = 0; j <= i; j += 2) {
        const j1 = Math.min(j + 1, n - 1);
        const bj = j * m;
        const bj1 = j1 * m;
        let d00 = 0;
        let d01 = 0;
        let d10 = 0;
        let d11 = 0;
        for (let r = 0; r < m; r++) {
          const a0 = centred[bi + r];
          const a1 = centred[bi1 + r];
          const b0 = centred[bj + r];
          const b1 = centred[bj1 + r];
          d00 += a0 * b0;
          d01 += a0 * b1;
          d10 += a1 * b0;
          d11 += a1 * b1;
        }
        c[i * n + j] = d00;
        c[j * n + i] = d00;
        c[i * n + j1] = d01;
        c[j1 * n + i] = d01;
        c[i1 * n + j] = d10;
        c[j * n + i1] = d10;
        c[i1 * n + j1] = d11;
        c[j1 * n + i1] = d11;
      }
    }
    block.count = m;
    return this.merge(block);
  }

  /**
   * Folds another accumulator over the same columns into this one, exactly
   * (Chan, Golub & LeVeque 1979). `other` is left unchanged.
   * @throws {EstimationInputError} when the column counts differ
   * @example shardA.merge(shardB) // as if every row of B had been pushed into A
   */
  merge(other: MomentAccumulator): this {
    if (other.n !== this.n) throw new EstimationInputError("other.n", "must equal this accumulator's column count", this.n, other.n);
    const mb = other.count;
    if (mb === 0) return this;
    const n = this.n;
    const ma = this.count;
    const m = ma + mb;
    const delta = this.delta;
    for (let i = 0; i < n; i++) delta[i] = other.mean[i] - this.mean[i];
    const wB = mb / m;
    const f = (ma * mb) / m;
    const c = this.comoment;
    const oc = other.comoment;
    // Read other's co-moment before writing ours so merging an accumulator with itself also works.
    for (let i = 0; i < n; i++) {
      const fi = f * delta[i];
      for (let j = 0; j <= i; j++) {
        const v = c[i * n + j] + oc[i * n + j] + fi * delta[j];
        c[i * n + j] = v;
        c[j * n + i] = v;
      }
    }
    for (let i = 0; i < n; i++) this.mean[i] += delta[i] * wB;
    this.count = m;
    return this;
  }

  /**
   * The covariance matrix, n×n row-major, newly allocated.
   * Denominator `"m"` (default) gives the maximum-likelihood estimate C/m; `"m-1"` the unbiased C/(m−1).
   * @throws {EstimationInputError} when there are too few rows for the denominator (m ≥ 1, or m ≥ 2 for "m-1")
   * @example acc.covariance()      // divides by m
   * @example acc.covariance("m-1") // divides by m − 1
   */
  covariance(denominator: CovarianceDenominator = "m"): Float64Array {
    let divisor: number;
    if (denominator === "m") divisor = this.count;
    else if (denominator === "m-1") divisor = this.count - 1;
    else throw new EstimationInputError("denominator", 'must be "m" or "m-1"', '"m" or "m-1"', denominator);
    if (divisor < 1) {
      const need = denominator === "m" ? 1 : 2;
      throw new EstimationInputError("count", `must be ≥ ${need} rows for the ${denominator} denominator`, `≥ ${need}`, this.count);
    }
    const out = new Float64Array(this.comoment.length);
    // Divide rather than multiply by 1/divisor: one rounding per entry, so C/m is correctly rounded.
    for (let k = 0; k < out.length; k++) out[k] = this.comoment[k] / divisor;
    return out;
  }

  /** Plain-JSON snapshot (numbers round-trip exactly through JSON). */
  toJSON(): MomentSnapshot {
    return { n: this.n, count: this.count, mean: Array.from(this.mean), comoment: Array.from(this.comoment) };
  }

  /**
   * Rebuilds an accumulator from {@link MomentAccumulator.toJSON} output, checking every field.
   * Round-off asymmetry up to 1e-12 (relative) is symmetrised away; more is refused.
   * @throws {EstimationInputError} naming the snapshot field and the rule it broke
   * @example MomentAccumulator.fromJSON(JSON.parse(text)).merge(localShard)
   */
  static fromJSON(s: MomentSnapshot): MomentAccumulator {
    const snap = s as unknown;
    if (typeof snap !== "object" || snap === null || Array.isArray(snap)) {
      throw new EstimationInputError("snapshot", "must be an object { n, count, mean, comoment }", "an object", snap);
    }
    const { n, count, mean, comoment } = snap as Record<string, unknown>;
    if (typeof n !== "number" || !Number.isInteger(n) || n < 1) {
      throw new EstimationInputError("snapshot.n", "must be an integer ≥ 1", "an integer ≥ 1", n);
    }
    if (typeof count !== "number" || !Number.isInteger(count) || count < 0) {
      throw new EstimationInputError("snapshot.count", "must be an integer ≥ 0", "an integer ≥ 0", count);
    }
    const meanArr = finiteArray("snapshot.mean", mean, n);
    const comomentArr = finiteArray("snapshot.comoment", comoment, n * n);
    let scale = 0;
    let asym = 0;
    for (let i = 0; i < n; i++) {
      const d = comomentArr[i * n + i];
      if (d < 0) throw new EstimationInputError(`snapshot.comoment[${i * n + i}]`, "diagonal entries are sums of squares and must be ≥ 0", "≥ 0", d);
      for (let j = 0; j < n; j++) {
        scale = Math.max(scale, Math.abs(comomentArr[i * n + j]));
        if (j < i) asym = Math.max(asym, Math.abs(comomentArr[i * n + j] - comomentArr[j * n + i]));
      }
    }
    if (asym > 1e-12 * scale) {
      throw new EstimationInputError("snapshot.comoment", "must be symmetric (relative asymmetry ≤ 1e-12)", "≤ 1e-12", asym / scale);
    }
    const acc = new MomentAccumulator(n);
    acc.count = count;
    acc.mean.set(meanArr);
    for (let i = 0; i < n; i++) {
      for (let j = 0; j <= i; j++) {
        const v = 0.5 * (comomentArr[i * n + j] + comomentArr[j * n + i]);
        acc.comoment[i * n + j] = v;
        acc.comoment[j * n + i] = v;
      }
    }
    return acc;
  }
}

function finiteArray(field: string, value: unknown, length: number): number[] {
  if (!Array.isArray(value)) throw new EstimationInputError(field, "must be an array of numbers", `an array of ${length}`, value);
  if (value.length !== length) throw new EstimationInputError(field, `must have ${length} entries`, length, value.length);
  for (let k = 0; k < length; k++) {
    const v: unknown = value[k];
    if (typeof v !== "number" || !Number.isFinite(v)) {
      throw new EstimationInputError(`${field}[${k}]`, "must be a finite number", "a finite number", v);
    }
  }
  return value as number[];
}
