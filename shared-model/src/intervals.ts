/**
 * Confidence intervals for counts and shares that keep their coverage where the normal
 * approximation fails: a handful of events, or none.
 */
import { InputError } from "./input-error";
import { gammaQuantile, normalQuantile } from "./distributions";

/** A bad argument, naming the field and the rule it broke. */
export class IntervalInputError extends InputError {}

/** Lower and upper end of an interval. */
export interface Bounds {
  low: number;
  high: number;
}

function checkConfidence(confidence: number): void {
  if (typeof confidence !== "number" || !(confidence > 0 && confidence < 1)) {
    throw new IntervalInputError("confidence", `must be strictly between 0 and 1, e.g. 0.95. Actual: ${String(confidence)}`);
  }
}

/**
 * Exact (Garwood 1936, "Fiducial limits for the Poisson distribution", Biometrika 28:437–442)
 * interval for the mean μ of a Poisson count observed as k:
 *   low = ½χ²₂ₖ(α/2) = G⁻¹(α/2; k),  high = ½χ²₂ₖ₊₂(1 − α/2) = G⁻¹(1 − α/2; k + 1),
 * with G⁻¹(·; a) the standard gamma quantile; low = 0 when k = 0. Coverage is at least the
 * nominal level for every μ. A real k is accepted for an effective count (Kish's (Σw)²/Σw² for
 * events of unequal weight), where the gamma form extends the formula smoothly.
 * @param k observed count (finite, ≥ 0)
 * @param confidence two-sided level in (0, 1); default 0.95
 * @throws IntervalInputError naming the bad argument
 * @example garwoodInterval(0) // { low: 0, high: 3.6889 }; garwoodInterval(1) // { low: 0.0253, high: 5.5716 }
 */
export function garwoodInterval(k: number, confidence = 0.95): Bounds {
  if (typeof k !== "number" || !(k >= 0) || k === Infinity) throw new IntervalInputError("k", `must be a finite count ≥ 0. Actual: ${String(k)}`);
  checkConfidence(confidence);
  const alpha = 1 - confidence;
  return { low: k === 0 ? 0 : gammaQuantile(alpha / 2, k), high: gammaQuantile(1 - alpha / 2, k + 1) };
}

/**
 * Wilson (1927, "Probable inference, the law of succession, and statistical inference", JASA
 * 22:209–212) score interval of a binomial share from `successes` of `trials`, which keeps its
 * coverage for small shares where the Wald interval fails (Brown, Cai & DasGupta 2001, Statistical
 * Science 16:101–133):
 *   centre = (p̂ + z²/2n)/(1 + z²/n),  half-width = z·√(p̂(1−p̂)/n + z²/4n²)/(1 + z²/n).
 * Never zero-width for n ≥ 1. Real (weighted) counts are accepted.
 * @param successes finite, 0 ≤ successes ≤ trials
 * @param trials finite, > 0
 * @param confidence two-sided level in (0, 1); default 0.95
 * @throws IntervalInputError naming the bad argument
 * @example wilsonInterval(81, 263) // { low: 0.2553, high: 0.3662 }
 */
export function wilsonInterval(successes: number, trials: number, confidence = 0.95): Bounds {
  if (typeof trials !== "number" || !(trials > 0) || trials === Infinity) {
    throw new IntervalInputError("trials", `must be a finite number > 0. Actual: ${String(trials)}`);
  }
  if (typeof successes !== "number" || !(successes >= 0 && successes <= trials)) {
    throw new IntervalInputError("successes", `must be a number from 0 to trials (${trials}). Actual: ${String(successes)}`);
  }
  checkConfidence(confidence);
  const z = normalQuantile(1 - (1 - confidence) / 2);
  const n = trials;
  const p = successes / n;
  const z2n = (z * z) / n;
  const centre = (p + z2n / 2) / (1 + z2n);
  const half = (z * Math.sqrt((p * (1 - p)) / n + (z * z) / (4 * n * n))) / (1 + z2n);
  // Exact ends: with 0 or n successes the interval touches 0 or 1 (rounding could leave 1e-17).
  return { low: successes === 0 ? 0 : Math.max(0, centre - half), high: successes === n ? 1 : Math.min(1, centre + half) };
}
