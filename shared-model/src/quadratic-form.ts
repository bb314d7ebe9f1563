/**
 * The scoring hot path: d² = (x−μ)ᵀ Λ (x−μ) over a precision matrix laid out once per model for
 * speed. `mahalanobisSq` in score.ts is the plain row-major kernel (used by the fit and as the
 * reference in tests); the Scorer uses this one.
 *
 * Layout ("packed" below). Rows are taken four at a time. For each group of rows i … i+3 the packed
 * array holds, in the order the kernel reads them:
 * 1. the group's 4×4 upper triangle, row by row (10 numbers), off-diagonal entries doubled;
 * 2. for every later column j, the four entries 2Λ_{i,j}, 2Λ_{i+1,j}, 2Λ_{i+2,j}, 2Λ_{i+3,j}.
 * The last n mod 4 rows follow one at a time as Λ_ii, 2Λ_{i,i+1}, …, 2Λ_{i,n−1}.
 * So d² = Σ_i diff_i (Σ_{j≥i} U_ij diff_j) with U the doubled upper triangle, read front to back
 * with one running index: every diff_j loaded in the inner loop feeds four independent multiply-
 * adds, and nothing is multiplied by 2 per payment.
 *
 * Why plain arrays, not Float64Array: V8 reads a packed array of doubles with fewer checks than a
 * typed array (whose length must be re-read for resizable buffers); on this kernel at n = 32 it
 * is about 1.4× faster (bench/kernel.ts). The arrays are built from numbers only and never get
 * holes, so V8 keeps them as unboxed doubles. Keep every call monomorphic: `x` is always a
 * Float64Array and `diff` always an array from {@link kernelScratch}.
 */

/** Λ and μ of one segment in the kernel's layout. */
export interface PackedQuadraticForm {
  n: number;
  /** Doubled upper triangle of Λ in the order the kernel reads it (see the module comment). */
  packed: number[];
  mean: number[];
}

/**
 * Lays out a symmetric precision matrix and its mean for {@link mahalanobisSqPacked}; done once
 * per model, not per payment. Reads only the upper triangle and the diagonal of Λ.
 * @param precision Λ, n×n row-major
 * @example packQuadraticForm(Float64Array.of(1, 0, 0, 4), Float64Array.of(0, 0), 2).packed // [1, 0, 4]
 */
export function packQuadraticForm(precision: Float64Array, mean: Float64Array, n: number): PackedQuadraticForm {
  if (precision.length !== n * n || mean.length !== n) {
    throw new RangeError(`precision must be ${n}×${n} and mean of length ${n}. Actual: ${precision.length} and ${mean.length}`);
  }
  const packed = doubles([]);
  const at = (i: number, j: number) => (i === j ? 1 : 2) * precision[i * n + j];
  let i = 0;
  for (; i + 3 < n; i += 4) {
    for (let a = 0; a < 4; a++) for (let b = a; b < 4; b++) packed.push(at(i + a, i + b));
    for (let j = i + 4; j < n; j++) for (let a = 0; a < 4; a++) packed.push(at(i + a, j));
  }
  for (; i < n; i++) for (let j = i; j < n; j++) packed.push(at(i, j));
  return { n, packed, mean: doubles(mean) };
}

/** Scratch for x − μ of length n, as an array of doubles (see the module comment). */
export function kernelScratch(n: number): number[] {
  return doubles(new Float64Array(n));
}

/**
 * A plain array that V8 stores as unboxed doubles whatever the values: it starts from a
 * non-integer (element kinds only ever widen), so an all-integer precision such as the identity
 * does not give a small-integer array and a second, slower shape at the kernel.
 */
function doubles(values: ArrayLike<number>): number[] {
  const out = [0.5];
  out.pop();
  for (let i = 0; i < values.length; i++) out.push(values[i]);
  return out;
}

/**
 * d² = (x−μ)ᵀ Λ (x−μ) on a packed form. Fills `diff` with x − μ; allocates nothing; NaN in x
 * propagates to the result. Sums the same products as `mahalanobisSq` in another order, so the two
 * agree to rounding (tests pin 1e-12 relative).
 * @param diff scratch from {@link kernelScratch}(n), overwritten
 * @example mahalanobisSqPacked(packQuadraticForm(Float64Array.of(1, 0, 0, 4), Float64Array.of(0, 0), 2), Float64Array.of(1, 1), kernelScratch(2)) // 5
 */
export function mahalanobisSqPacked(form: PackedQuadraticForm, x: Float64Array, diff: number[]): number {
  const { n, packed: q, mean } = form;
  for (let i = 0; i < n; i++) diff[i] = x[i] - mean[i];
  let total = 0;
  let k = 0;
  let i = 0;
  for (; i + 3 < n; i += 4) {
    const d0 = diff[i];
    const d1 = diff[i + 1];
    const d2 = diff[i + 2];
    const d3 = diff[i + 3];
    // Row sums of the group's own triangle, then the four rows against every later column.
    let a0 = q[k] * d0 + q[k + 1] * d1 + q[k + 2] * d2 + q[k + 3] * d3;
    let a1 = q[k + 4] * d1 + q[k + 5] * d2 + q[k + 6] * d3;
    let a2 = q[k + 7] * d2 + q[k + 8] * d3;
    let a3 = q[k + 9] * d3;
    k += 10;
    for (let j = i + 4; j < n; j++) {
      const dj = diff[j];
      a0 += q[k] * dj;
      a1 += q[k + 1] * dj;
      a2 += q[k + 2] * dj;
      a3 += q[k + 3] * dj;
      k += 4;
    }
    total += d0 * a0 + d1 * a1 + d2 * a2 + d3 * a3;
  }
  for (; i < n; i++) {
    const di = diff[i];
    let a = q[k++] * di;
    for (let j = i + 1; j < n; j++) a += q[k++] * diff[j];
    total += di * a;
  }
  // Λ is positive definite, so d² ≥ 0; only rounding next to x = μ can dip below zero.
  return total < 0 ? 0 : total;
}
