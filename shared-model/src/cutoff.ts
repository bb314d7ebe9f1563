/**
 * Choosing the cutoff on d². This module picks it from the training distances so that a chosen
 * share of rows would be flagged (the review queue's capacity is the usual constraint).
 */
import { chiSquareSurvival } from "./distributions";

/** A cutoff on the squared Mahalanobis distance with what it means on the training rows. */
export interface FlagRateCutoff {
  /** Flag when d² > this. */
  mahalanobisSq: number;
  /** P(χ²ₙ > mahalanobisSq): the same cutoff as a tail probability (flag when below it). */
  tailProbability: number;
  /** Share of the given rows with d² strictly above the cutoff (the realised flag rate). */
  flagRate: number;
}

/**
 * The cutoff on d² that flags the share `rate` of the given rows: the empirical (1 − rate)
 * quantile of the distances, interpolated linearly between order statistics (Hyndman & Fan 1996,
 * "Sample quantiles in statistical packages", definition 7, the default of R and NumPy): with the
 * distances sorted ascending s_0 ≤ … ≤ s_{m−1} and h = (m − 1)(1 − rate), the cutoff is
 * s_⌊h⌋ + (h − ⌊h⌋)(s_⌊h⌋+1 − s_⌊h⌋). Rows flag when d² is strictly above it, so for distinct
 * distances the realised rate is within 1/m of `rate`. Ties: rows equal to the cutoff are not
 * flagged, so a run of equal distances at the cutoff lowers the realised rate; `flagRate` reports
 * what was actually achieved. Should rounding put the interpolated value on s_⌊h⌋+1 (adjacent
 * doubles), s_⌊h⌋ is used instead. The input is not modified (a sorted copy is made).
 * @param mahalanobisSqValues d² of the training rows (finite, ≥ 0, at least one)
 * @param rate share of rows to flag, strictly between 0 and 1
 * @param n degrees of freedom (number of model columns) for the tail probability
 * @throws RangeError naming `rate`, `n` or the offending distance
 * @example cutoffForFlagRate(Float64Array.from({ length: 100 }, (_, i) => i + 1), 0.05, 3)
 *   // { mahalanobisSq: 95.05, tailProbability: 1.8e-20, flagRate: 0.05 }
 */
export function cutoffForFlagRate(mahalanobisSqValues: Float64Array, rate: number, n: number): FlagRateCutoff {
  if (typeof rate !== "number" || !(rate > 0 && rate < 1)) {
    throw new RangeError(`rate must be a number strictly between 0 and 1 (a share of rows, e.g. 0.005). Actual: ${rate}.`);
  }
  if (!Number.isInteger(n) || n < 1) {
    throw new RangeError(`n (degrees of freedom = model columns) must be a positive integer. Actual: ${n}.`);
  }
  const m = mahalanobisSqValues.length;
  if (m === 0) throw new RangeError("mahalanobisSqValues must hold at least one distance. Actual: none.");
  for (let i = 0; i < m; i++) {
    const v = mahalanobisSqValues[i];
    if (!(v >= 0) || v === Infinity) {
      throw new RangeError(`mahalanobisSqValues[${i}] must be a finite number ≥ 0. Actual: ${v}.`);
    }
  }
  // Float64Array sorts numerically (unlike Array.prototype.sort's default string order).
  const sorted = Float64Array.from(mahalanobisSqValues).sort();
  const h = (m - 1) * (1 - rate);
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, m - 1);
  let cut = sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
  // Between adjacent doubles the interpolation can round up onto s_hi, which would unflag the
  // rows equal to it; the lower order statistic keeps the flagged count as defined.
  if (cut >= sorted[hi] && sorted[hi] > sorted[lo]) cut = sorted[lo];
  // Count above the cut by binary search in the sorted copy: first index with value > cut.
  let a = 0;
  let b = m;
  while (a < b) {
    const mid = (a + b) >>> 1;
    if (sorted[mid] > cut) b = mid;
    else a = mid + 1;
  }
  return { mahalanobisSq: cut, tailProbability: chiSquareSurvival(cut, n), flagRate: (m - a) / m };
}
