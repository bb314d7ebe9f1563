/**
 * The Gaussian log-density, in one place for the fit's cutoff, the artifact's consistency check,
 * the retuned cutoff and the scorer's per-segment constant.
 */

/** ln 2π, the constant of the Gaussian log-density. */
const LN_2PI = Math.log(2 * Math.PI);

/**
 * Natural log of the n-variate normal density at a point whose squared Mahalanobis distance from
 * the mean is `mahalanobisSq`: ln N = −½ (n ln 2π + ln|Σ| + d²) (Bishop 2006, eq. 2.43; reference
 * [8] of shared-model/README.md). With d² = 0 it is the density's log-normalizing constant.
 *
 * @param n - the number of model columns.
 * @param logDet - ln|Σ| of the covariance.
 * @param mahalanobisSq - d² = (x − μ)ᵀ Σ⁻¹ (x − μ), ≥ 0.
 * @example logDensityAt(1, 0, 0) // → −½ ln 2π ≈ −0.9189 (the standard normal's peak)
 */
export function logDensityAt(n: number, logDet: number, mahalanobisSq: number): number {
  return -0.5 * (n * LN_2PI + logDet + mahalanobisSq);
}
