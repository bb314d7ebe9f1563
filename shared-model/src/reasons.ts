/**
 * Reasons for a score: each feature's distribution given all the others, read straight off the
 * precision matrix Λ = Σ⁻¹. For x ~ N(μ, Σ) and a block B of columns with the rest A,
 *   x_B | x_A ~ N( μ_B − Λ_BB⁻¹ Λ_BA (x_A − μ_A),  Λ_BB⁻¹ )
 * (Bishop 2006, Pattern Recognition and Machine Learning, §2.3.1, eqs. 2.73 and 2.75; Rue & Held
 * 2005, Gaussian Markov Random Fields, ch. 2, conditional properties of a GMRF). For one column j this is mean
 * μ_j − (1/Λ_jj) Σ_{k≠j} Λ_jk (x_k − μ_k) and variance 1/Λ_jj: O(n) per feature, no inversion.
 */
import { normalQuantile } from "./distributions";
import { logTailProbability } from "./tail-law";
import { hourFromCyclic, inverseTransform } from "./features";
import type { FittedFeature, Reason, SegmentModel } from "./types";

/** Two-sided 95 % normal quantile z₀.₉₇₅ ≈ 1.96, computed once. */
const Z_95 = normalQuantile(0.975);

/** Hours in the cyclic-hour period (the artifact stores no other period). */
const PERIOD_HOURS = 24;

/** Conditional distribution of one model column given all the others, in model units. */
export interface ColumnConditional {
  /** E[x_j | x_rest]. */
  mean: number;
  /** sd(x_j | x_rest) = 1/√Λ_jj. */
  sd: number;
}

/**
 * Conditional mean and sd of model column j given the other columns of x under a segment's
 * Gaussian: mean μ_j − (1/Λ_jj)·Σ_{k≠j} Λ_jk (x_k − μ_k), sd 1/√Λ_jj.
 * @example conditionalColumn(seg, x, 0) // { mean: 3.1, sd: 0.42 }
 */
export function conditionalColumn(seg: SegmentModel, x: ArrayLike<number>, j: number): ColumnConditional {
  const { n, precision: p, mean: mu } = seg;
  const row = j * n;
  let s = 0;
  for (let k = 0; k < n; k++) if (k !== j) s += p[row + k] * (x[k] - mu[k]);
  const lambda = p[row + j];
  return { mean: mu[j] - s / lambda, sd: 1 / Math.sqrt(lambda) };
}

/** Conditional distribution of a pair of model columns (a, b) given all the others. */
export interface PairConditional {
  /** E[(x_a, x_b) | x_rest]. */
  mean: [number, number];
  /** Conditional covariance Λ_BB⁻¹ as [c_aa, c_ab, c_bb]. */
  covariance: [number, number, number];
  /** (x_B − mean)ᵀ Λ_BB (x_B − mean): the pair's conditional squared distance (χ²₂ under the model). */
  distanceSq: number;
}

/**
 * Conditional mean, covariance and squared distance of columns a and b given the others, from
 * the 2×2 precision block: mean μ_B − Λ_BB⁻¹ Λ_BA (x_A − μ_A), covariance Λ_BB⁻¹.
 * @example conditionalPair(seg, x, 2, 3) // { mean: [0.41, -0.83], covariance: [0.2, 0.01, 0.18], distanceSq: 7.9 }
 */
export function conditionalPair(seg: SegmentModel, x: ArrayLike<number>, a: number, b: number): PairConditional {
  const { n, precision: p, mean: mu } = seg;
  let ta = 0;
  let tb = 0;
  for (let k = 0; k < n; k++) {
    if (k === a || k === b) continue;
    const dk = x[k] - mu[k];
    ta += p[a * n + k] * dk;
    tb += p[b * n + k] * dk;
  }
  const laa = p[a * n + a];
  const lab = p[a * n + b];
  const lbb = p[b * n + b];
  const det = laa * lbb - lab * lab;
  const caa = lbb / det;
  const cab = -lab / det;
  const cbb = laa / det;
  const ma = mu[a] - (caa * ta + cab * tb);
  const mb = mu[b] - (cab * ta + cbb * tb);
  const ra = x[a] - ma;
  const rb = x[b] - mb;
  const distanceSq = Math.max(0, laa * ra * ra + 2 * lab * ra * rb + lbb * rb * rb);
  return { mean: [ma, mb], covariance: [caa, cab, cbb], distanceSq };
}

/**
 * Central 95 % range of the hour for a cyclic pair, by a first-order (delta-method) projection:
 * the angle φ of the conditional mean m = (m_sin, m_cos) has gradient (cos φ, −sin φ)/|m|, so
 * sd(φ) ≈ √(tᵀ C t)/|m| with t the unit tangent (cos φ, −sin φ) and C the conditional covariance;
 * the range is centre ± z₀.₉₇₅·sd(φ), converted to hours. Accurate while sd(φ) is small; when the
 * half-width reaches half a day every hour is plausible and the range is [0, 24]; at |m| = 0 the
 * mean has no direction and the centre is reported as 0 with that whole-day range.
 * Hours are in [0, 24); a range that crosses midnight has low > high.
 * @example cyclicHourRange({ mean: [0, 0.9], covariance: [0.01, 0, 0.01], distanceSq: 0 })
 *   // { center: 0, low: 23.17, high: 0.83 }
 */
export function cyclicHourRange(cond: PairConditional): { center: number; low: number; high: number } {
  const [ms, mc] = cond.mean;
  const [css, csc, ccc] = cond.covariance;
  const r = Math.hypot(ms, mc);
  // A conditional mean at the origin has no direction: no centre hour, and every hour is plausible.
  if (!(r > 0)) return { center: 0, low: 0, high: PERIOD_HOURS };
  const center = hourFromCyclic(ms, mc, PERIOD_HOURS);
  const sinPhi = ms / r;
  const cosPhi = mc / r;
  const tangentVar = cosPhi * cosPhi * css - 2 * sinPhi * cosPhi * csc + sinPhi * sinPhi * ccc;
  const halfAngle = (Z_95 * Math.sqrt(Math.max(0, tangentVar))) / r;
  if (!(halfAngle < Math.PI)) return { center, low: 0, high: PERIOD_HOURS };
  const halfHours = (halfAngle * PERIOD_HOURS) / (2 * Math.PI);
  return { center, low: wrapHour(center - halfHours), high: wrapHour(center + halfHours) };
}

function wrapHour(h: number): number {
  const w = h % PERIOD_HOURS;
  return w < 0 ? w + PERIOD_HOURS : w;
}

/**
 * A single-column expected range in raw units, clipped to the feature's training range when one
 * is stored; when the whole range lies past one end of it, clipping would leave a point
 * ("0.008–0.008"), so the range says on which side it lies instead.
 */
function expectedRange(f: FittedFeature, mean: number, sd: number): Reason["expected"] {
  const center = inverseTransform(f, mean);
  const low = inverseTransform(f, mean - Z_95 * sd);
  const high = inverseTransform(f, mean + Z_95 * sd);
  const range = f.observed;
  if (range === undefined) return { center, low, high };
  const clip = (value: number) => (value < range.min ? range.min : value > range.max ? range.max : value);
  const clipped: Reason["expected"] = { center: clip(center), low: clip(low), high: clip(high) };
  if (high < range.min) clipped.outsideTraining = "below";
  else if (low > range.max) clipped.outsideTraining = "above";
  return clipped;
}

/**
 * Per-feature reasons for a payment under one segment's Gaussian, rarest first by the tail
 * probability of the residual — P(χ²₁ > r²) for a column, P(χ²₂ > d²) for a cyclic pair, so one-
 * and two-column features are ranked on the same scale (ties keep feature order) — the first
 * `top` returned.
 * A single-column feature gets (x_j − E[x_j|rest]) / sd(x_j|rest) and the expected centre and
 * central 95 % range E ± z₀.₉₇₅·sd mapped back to raw units with the feature's inverse
 * transform (monotone, so the interval's ends map to the ends). A cyclic-hour feature uses its
 * 2×2 conditional block: the residual is √(conditional d²) and the range comes from
 * {@link cyclicHourRange}. Single-column ranges are clipped to the raw values seen in training
 * (`observed`, when the artifact has it): the Gaussian lives in transformed units and can reach
 * past what the data can be (a count below 0, or beyond a Yeo–Johnson asymptote, which would
 * otherwise come back as ±Infinity).
 * @param raw raw values in feature order (reported as `actual`)
 * @param x the same payment in model columns (from transformInto)
 * @param top how many reasons to return (non-negative integer; default 3)
 * @throws RangeError on mismatched lengths or a bad `top`
 * @example conditionalReasons(seg, features, [1240, 2], x)[0]
 *   // { feature: "amount", actual: 1240, expected: { center: 96, low: 60, high: 140 }, standardizedResidual: 6.2 }
 */
export function conditionalReasons(seg: SegmentModel, features: readonly FittedFeature[], raw: ArrayLike<number>, x: Float64Array, top = 3): Reason[] {
  if (!Number.isInteger(top) || top < 0) throw new RangeError(`top must be a non-negative integer. Actual: ${top}.`);
  if (raw.length !== features.length) {
    throw new RangeError(`raw must have one value per feature (${features.length}). Actual: ${raw.length}.`);
  }
  if (x.length !== seg.n) throw new RangeError(`x must have n = ${seg.n} model columns. Actual: ${x.length}.`);
  const columnCount = features.reduce((s, f) => s + f.columns.length, 0);
  if (columnCount !== seg.n) {
    throw new RangeError(`features produce ${columnCount} model columns but the segment has n = ${seg.n}.`);
  }

  const reasons: Reason[] = [];
  // Model columns behind each reason: 1, or 2 for a cyclic hour (the dof of its residual's χ²).
  const columnsOf: number[] = [];
  let c = 0;
  for (let i = 0; i < features.length; i++) {
    const f = features[i];
    if (f.transform === "cyclic-hour") {
      const cond = conditionalPair(seg, x, c, c + 1);
      reasons.push({
        feature: f.name,
        actual: raw[i],
        expected: cyclicHourRange(cond),
        standardizedResidual: Math.sqrt(cond.distanceSq),
      });
      columnsOf.push(2);
      c += 2;
    } else {
      const { mean, sd } = conditionalColumn(seg, x, c);
      reasons.push({
        feature: f.name,
        actual: raw[i],
        expected: expectedRange(f, mean, sd),
        standardizedResidual: (x[c] - mean) / sd,
      });
      columnsOf.push(1);
      c += 1;
    }
  }
  // Rank on one scale: a column's |z| and a pair's √χ²₂ are not comparable (2.5 for a pair is
  // p ≈ 0.044, 2.4 for a column p ≈ 0.016), their tail probabilities are. Logs keep far-out
  // residuals apart. Array.prototype.sort is stable (ES2019), so ties keep feature order.
  // A small segment read with the predictive law ranks on that law too (k(m + 1)/(m − n)·F(k, m − n)).
  const order = reasons.map((reason, k) => ({ reason, logTail: logTailProbability(reason.standardizedResidual ** 2, seg, columnsOf[k]) }));
  order.sort((p, q) => p.logTail - q.logTail);
  return order.slice(0, top).map((o) => o.reason);
}
