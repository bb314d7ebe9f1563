/**
 * Dense linear algebra on row-major `Float64Array`s for the small symmetric matrices of the model
 * (n ≤ a few hundred). Pure functions; nothing here allocates inside a loop over rows.
 *
 * Storage: an n×n matrix `a` holds element (i, j) at `a[i * n + j]`.
 */

/** Result of a Cholesky attempt; `ok` is false when the matrix is not (numerically) positive definite. */
export interface CholeskyResult {
  /** Whether every pivot was positive. */
  ok: boolean;
  /** Lower-triangular factor L with A = L·Lᵀ (upper triangle zero). Undefined past `failedAt`. */
  lower: Float64Array;
  /** Index of the first non-positive pivot, or -1 when `ok`. */
  failedAt: number;
  /** The offending pivot value (A_kk − Σ L_kj²) at `failedAt`, or NaN when `ok`. */
  failedPivot: number;
}

/**
 * Returns (A + Aᵀ)/2, so round-off asymmetry from accumulation never reaches the factorisation.
 * @example symmetrize(Float64Array.of(1, 2, 2.0000001, 1), 2)
 */
export function symmetrize(a: Float64Array, n: number): Float64Array {
  const out = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    out[i * n + i] = a[i * n + i];
    for (let j = 0; j < i; j++) {
      const v = 0.5 * (a[i * n + j] + a[j * n + i]);
      out[i * n + j] = v;
      out[j * n + i] = v;
    }
  }
  return out;
}

/**
 * Cholesky–Banachiewicz factorisation A = L·Lᵀ of a symmetric matrix (only the lower triangle of
 * `a` is read). Does not throw: a non-positive pivot is reported through `ok`/`failedAt`, so
 * callers can raise a diagnostic that names the cause (Golub & Van Loan, Matrix Computations, §4.2).
 * @example cholesky(Float64Array.of(4, 2, 2, 3), 2).lower // [2, 0, 1, √2]
 */
export function cholesky(a: Float64Array, n: number): CholeskyResult {
  const lower = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let sum = a[i * n + j];
      for (let k = 0; k < j; k++) sum -= lower[i * n + k] * lower[j * n + k];
      if (i === j) {
        if (!(sum > 0) || !Number.isFinite(sum)) {
          return { ok: false, lower, failedAt: i, failedPivot: sum };
        }
        lower[i * n + i] = Math.sqrt(sum);
      } else {
        lower[i * n + j] = sum / lower[j * n + j];
      }
    }
  }
  return { ok: true, lower, failedAt: -1, failedPivot: Number.NaN };
}

/**
 * ln|A| from its Cholesky factor: 2·Σ ln L_ii. Never forms the determinant, which under- or
 * overflows for dozens of features.
 */
export function logDetFromCholesky(lower: Float64Array, n: number): number {
  let s = 0;
  for (let i = 0; i < n; i++) s += Math.log(lower[i * n + i]);
  return 2 * s;
}

/**
 * A⁻¹ from the Cholesky factor of A: inverts L by forward substitution, then forms L⁻ᵀ·L⁻¹.
 * The result is exactly symmetric (the upper triangle is mirrored from the lower).
 */
export function inverseFromCholesky(lower: Float64Array, n: number): Float64Array {
  // inv(L) is lower triangular.
  const li = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    li[i * n + i] = 1 / lower[i * n + i];
    for (let j = 0; j < i; j++) {
      let sum = 0;
      for (let k = j; k < i; k++) sum -= lower[i * n + k] * li[k * n + j];
      li[i * n + j] = sum / lower[i * n + i];
    }
  }
  // A⁻¹ = inv(L)ᵀ · inv(L); element (i, j) = Σ_{k ≥ max(i,j)} li[k,i]·li[k,j].
  const inv = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let sum = 0;
      for (let k = i; k < n; k++) sum += li[k * n + i] * li[k * n + j];
      inv[i * n + j] = sum;
      inv[j * n + i] = sum;
    }
  }
  return inv;
}

/** Solves L·y = b (forward substitution) into `out`; `out` may alias `b`. */
export function forwardSubstitute(lower: Float64Array, n: number, b: Float64Array, out: Float64Array): Float64Array {
  for (let i = 0; i < n; i++) {
    let sum = b[i];
    for (let k = 0; k < i; k++) sum -= lower[i * n + k] * out[k];
    out[i] = sum / lower[i * n + i];
  }
  return out;
}

/** C = A·B for n×n row-major matrices. */
export function multiply(a: Float64Array, b: Float64Array, n: number): Float64Array {
  const c = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let k = 0; k < n; k++) {
      const aik = a[i * n + k];
      if (aik === 0) continue;
      for (let j = 0; j < n; j++) c[i * n + j] += aik * b[k * n + j];
    }
  }
  return c;
}

/** The n×n identity. */
export function identity(n: number): Float64Array {
  const out = new Float64Array(n * n);
  for (let i = 0; i < n; i++) out[i * n + i] = 1;
  return out;
}

/** Largest |A_ij − A_ji|, scaled by the largest |A_ij|; 0 for an exactly symmetric matrix. */
export function relativeAsymmetry(a: Float64Array, n: number): number {
  let worst = 0;
  let scale = 0;
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) {
      scale = Math.max(scale, Math.abs(a[i * n + j]));
      if (j < i) worst = Math.max(worst, Math.abs(a[i * n + j] - a[j * n + i]));
    }
  }
  return scale === 0 ? 0 : worst / scale;
}

/** Converts number[][] (rows) to a row-major Float64Array; throws when the rows are ragged. */
export function fromRows(rows: readonly (readonly number[])[]): Float64Array {
  const n = rows.length;
  const out = new Float64Array(n * n);
  rows.forEach((row, i) => {
    if (row.length !== n) throw new RangeError(`row ${i} has ${row.length} entries. Expected: ${n}.`);
    for (let j = 0; j < n; j++) out[i * n + j] = row[j];
  });
  return out;
}

/** Converts a row-major n×n Float64Array to number[][] (for JSON). */
export function toRows(a: Float64Array, n: number): number[][] {
  const rows: number[][] = [];
  for (let i = 0; i < n; i++) rows.push(Array.from(a.subarray(i * n, i * n + n)));
  return rows;
}
