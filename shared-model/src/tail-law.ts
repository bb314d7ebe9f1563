/**
 * The law a payment's tail probability is read from, one implementation for the fit, the CLI, the
 * worker and the review app. A segment whose cutoff was chosen by the predictive law (its tail held
 * too few training rows, `cutoff-law.ts`) reports the same law for its payments: under the model a
 * new point's d² against the m-row maximum-likelihood fit in n columns is exactly
 *   d²_new ~ n(m + 1)/(m − n) · F(n, m − n)
 * (Hotelling's T² for a new observation; Mardia, Kent & Bibby 1979, "Multivariate Analysis", §3.5,
 * with the ÷m covariance rescaled; from memory), so P(d²_new > d²) is calibrated for a small
 * segment, where P(χ²ₙ > d²) runs too small (about 2 % of fresh draws fall below 1 % at 300 rows
 * of 8 columns; simulated in tail-law.test.ts). Every other segment — and every artifact written
 * before the law was stored — keeps P(χ²ₙ > d²), the law the predictive one tends to as m grows.
 */
import { chiSquareSurvival, fSurvival, logChiSquareSurvival, logFSurvival } from "./distributions";

/** `chi-square`: P(χ²ₙ > d²). `predictive`: P(n(m + 1)/(m − n)·F(n, m − n) > d²), a new point's exact law. */
export type TailLaw = "chi-square" | "predictive";

/** What the law needs of a segment: its columns, its training rows and the law stored for it. */
export interface TailLawSegment {
  n: number;
  rows: number;
  /** Absent in artifacts written before the law was stored: χ². */
  tailLaw?: TailLaw;
}

/** A tail probability and its base-10 log (finite where the probability underflows). */
export interface TailFigures {
  tailProbability: number;
  log10TailProbability: number;
}

/** True when the segment reads the predictive law (it needs more rows than columns). */
function predictive(segment: TailLawSegment): boolean {
  return segment.tailLaw === "predictive" && segment.rows > segment.n;
}

/** The F argument and degrees of freedom of d² over `columns` under the predictive law. */
function fArgument(mahalanobisSq: number, segment: TailLawSegment, columns: number): number {
  return (mahalanobisSq * (segment.rows - segment.n)) / (columns * (segment.rows + 1));
}

/**
 * ln P(D > d²) under the segment's law for `columns` of its n columns (n for the whole payment; 1
 * or 2 for one feature's standardized residual in the reasons, where the predictive form keeps the
 * segment's m − n residual degrees of freedom: k(m + 1)/(m − n)·F(k, m − n)). The predictive law
 * needs m > n; a segment with no more rows than columns reads χ².
 * @example logTailProbability(20.09, { n: 8, rows: 300, tailLaw: "predictive" }) // ln 0.013 (χ²₈: ln 0.01)
 */
export function logTailProbability(mahalanobisSq: number, segment: TailLawSegment, columns = segment.n): number {
  if (!predictive(segment)) return logChiSquareSurvival(mahalanobisSq, columns);
  return logFSurvival(fArgument(mahalanobisSq, segment, columns), columns, segment.rows - segment.n);
}

/**
 * P(d²_new > c) for a new point from the model's own Gaussian against the maximum-likelihood fit of
 * `rows` rows in n columns: P(F(n, m − n) > c·(m − n)/(n(m + 1))). Tends to P(χ²ₙ > c) as m grows.
 * @example predictiveTail(20.09, 8, 300) // ≈ 0.013 (χ²₈ gives 0.01)
 */
export function predictiveTail(cutoffMahalanobisSq: number, n: number, rows: number): number {
  return tailFigures(cutoffMahalanobisSq, { n, rows, tailLaw: "predictive" }).tailProbability;
}

/**
 * A payment's tail probability and its log₁₀ under the segment's law. While the probability is a
 * normal double its own log is exact enough; past that (about 1e-300) the log comes from the
 * incomplete gamma or beta function in log space, so only the rare far-out payment pays twice.
 * @example tailFigures(9.49, { n: 4, rows: 10_000 }) // { tailProbability: 0.05, log10TailProbability: −1.301 }
 */
export function tailFigures(mahalanobisSq: number, segment: TailLawSegment): TailFigures {
  const tail = predictive(segment) ? fSurvival(fArgument(mahalanobisSq, segment, segment.n), segment.n, segment.rows - segment.n) : chiSquareSurvival(mahalanobisSq, segment.n);
  const log10 = tail > 1e-300 ? Math.log10(tail) : logTailProbability(mahalanobisSq, segment) / Math.LN10;
  return { tailProbability: tail, log10TailProbability: log10 };
}
