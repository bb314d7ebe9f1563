/**
 * Special functions and distributions the model needs: ln Γ, the regularized incomplete gamma
 * functions P and Q, the chi-square distribution (survival, cdf, quantiles) and the standard normal
 * quantile. Pure functions of numbers; nothing allocates.
 *
 * Why so careful about tails: a payment's tail probability P(χ²ₙ > d²) is reported as evidence and
 * compared across segments, so it must stay accurate (≈1e-13 relative) down to the smallest
 * doubles instead of collapsing to 0 the way 1 − cdf does.
 *
 * References:
 * [1] Press, Teukolsky, Vetterling & Flannery, Numerical Recipes, 3rd ed. (2007), §6.1–6.2
 *     (series and Lentz continued fraction for the incomplete gamma function).
 * [2] Loader, C. (2000) "Fast and accurate computation of binomial probabilities" (the
 *     saddle-point form x^a e^{−x}/Γ(a) = exp(−a·D(t)) · √(a/2π) · e^{−stirlerr(a)} used below).
 * [3] Abramowitz & Stegun (1964), 6.1.40 (Stirling series for ln Γ).
 * [4] Wichura, M. J. (1988) "Algorithm AS 241: The percentage points of the normal distribution",
 *     Applied Statistics 37(3):477–484.
 * [5] Wilson, E. B. & Hilferty, M. M. (1931) "The distribution of chi-square", PNAS 17:684–688.
 */

/** ½·ln(2π). */
const HALF_LN_TWO_PI = 0.5 * Math.log(2 * Math.PI);

/** √π. */
const SQRT_PI = Math.sqrt(Math.PI);

/** Below this, Lentz's method replaces an exact zero to avoid dividing by it ([1] §5.2). */
const TINY = 1e-300;

/** ln Γ uses the Stirling series from here up; smaller arguments are shifted up by recurrence. */
const STIRLING_FROM = 8;

function describe(value: unknown): string {
  return typeof value === "number" ? String(value) : `${typeof value} ${JSON.stringify(value)}`;
}

function requireFinitePositive(name: string, value: number): void {
  if (typeof value !== "number" || !Number.isFinite(value) || value <= 0) {
    throw new RangeError(`${name} must be a finite number > 0. Actual: ${describe(value)}`);
  }
}

function requireNonNegative(name: string, value: number): void {
  if (typeof value !== "number" || Number.isNaN(value) || value < 0) {
    throw new RangeError(`${name} must be a number ≥ 0 (Infinity allowed). Actual: ${describe(value)}`);
  }
}

/**
 * Largest dof accepted. The expansions need O(√dof) terms near the median; 1e9 keeps one call
 * near a millisecond, far beyond any model's column count.
 */
export const MAX_CHI_SQUARE_DOF = 1e9;

function requireDof(dof: number): void {
  if (typeof dof !== "number" || !Number.isSafeInteger(dof) || dof <= 0) {
    throw new RangeError(`dof must be a positive integer. Actual: ${describe(dof)}`);
  }
  if (dof > MAX_CHI_SQUARE_DOF) {
    throw new RangeError(`dof must be at most ${MAX_CHI_SQUARE_DOF}. Actual: ${dof}`);
  }
}

function requireNotNaN(name: string, value: number): void {
  if (typeof value !== "number" || Number.isNaN(value)) {
    throw new RangeError(`${name} must be a number (not NaN). Actual: ${describe(value)}`);
  }
}

function requireProbability(name: string, value: number): void {
  if (typeof value !== "number" || !(value >= 0 && value <= 1)) {
    throw new RangeError(`${name} must be a probability in [0, 1]. Actual: ${describe(value)}`);
  }
}

/**
 * Remainder of the Stirling series, ln Γ(x) − [(x−½)·ln x − x + ½·ln 2π], for x ≥ 8.
 * Coefficients B₂ₖ / (2k(2k−1)) ([3]); the first omitted term is below 1e-16 at x = 8.
 */
function stirlingSeries(x: number): number {
  const r = 1 / x;
  const r2 = r * r;
  return r * (1 / 12 + r2 * (-1 / 360 + r2 * (1 / 1260 + r2 * (-1 / 1680 + r2 * (1 / 1188 + r2 * (-691 / 360360 + r2 * (1 / 156 + r2 * (-3617 / 122400))))))));
}

function lnGammaPositive(x: number): number {
  if (x >= STIRLING_FROM) return (x - 0.5) * Math.log(x) - x + HALF_LN_TWO_PI + stirlingSeries(x);
  // Integers and half-integers (every chi-square shape dof/2) exactly: Γ(n) = (n−1)!, and
  // Γ(k+½) = √π·1·3·5·…·(2k−1)/2ᵏ; the products are exact in double below 8, so ln Γ(1) = ln Γ(2) = 0
  // exactly instead of carrying the ~2e-15 left over by the recurrence below.
  if (Number.isInteger(2 * x)) {
    if (Number.isInteger(x)) {
      let factorial = 1;
      for (let k = 2; k < x; k++) factorial *= k;
      return Math.log(factorial);
    }
    let oddProduct = 1;
    for (let k = 1; k < 2 * x - 1; k += 2) oddProduct *= k;
    return Math.log((SQRT_PI * oddProduct) / 2 ** (x - 0.5));
  }
  // Γ(x) = Γ(x+k) / (x(x+1)…(x+k−1)): shift into the range where the series is exact to double.
  let product = 1;
  let shifted = x;
  while (shifted < STIRLING_FROM) {
    product *= shifted;
    shifted += 1;
  }
  return lnGammaPositive(shifted) - Math.log(product);
}

/**
 * Natural log of the gamma function for x > 0 (Stirling series with the Bernoulli corrections
 * through B₁₆, after shifting x ≥ 8 by the recurrence Γ(x+1) = x·Γ(x); [3]). Integers and
 * half-integers below 8 come from exact products; elsewhere the absolute error is below ~4e-15
 * for x < 8 and the relative error ~1e-16 above. Overflows to Infinity only above ~2.5e305.
 * @param x argument, finite and > 0
 * @returns ln Γ(x)
 * @throws {RangeError} when x is not a finite number > 0
 * @example lnGamma(5) // ln 24 = 3.1780538303479458
 */
export function lnGamma(x: number): number {
  requireFinitePositive("x", x);
  return lnGammaPositive(x);
}

/**
 * a·D(t) with D(t) = t − ln(1+t) ≥ 0 and t = (x − a)/a, i.e. (x − a) − a·ln(x/a), without the
 * cancellation near x = a (series) and without forming 1 + t when x ≪ a (direct form on x/a).
 */
function scaledDeviance(a: number, x: number): number {
  const t = (x - a) / a;
  if (Math.abs(t) >= 0.5) return x - a - a * Math.log(x / a);
  // ln(1+t) = 2·atanh(w), w = t/(2+t); t − 2w = t·w, so D = t·w − 2(w³/3 + w⁵/5 + …).
  const w = t / (2 + t);
  const w2 = w * w;
  let power = w * w2;
  let sum = 0;
  for (let k = 3; ; k += 2) {
    const term = power / k;
    sum += term;
    if (Math.abs(term) <= Math.abs(sum) * 1e-17) break;
    power *= w2;
  }
  return a * (t * w - 2 * sum);
}

/**
 * ln(x^a · e^{−x} / Γ(a)) for a > 0, x > 0: the common factor of P and Q. For a ≥ 8 the saddle-point
 * form of [2] avoids subtracting numbers of size a·ln x that nearly cancel.
 */
function logGammaPrefix(a: number, x: number): number {
  if (a < STIRLING_FROM) return a * Math.log(x) - x - lnGammaPositive(a);
  return -scaledDeviance(a, x) + 0.5 * Math.log(a / (2 * Math.PI)) - stirlingSeries(a);
}

function iterationLimit(a: number): number {
  // Both expansions need O(√a) terms near x ≈ a ([1] §6.2); this leaves a wide margin.
  return 1000 + 20 * Math.ceil(Math.sqrt(a));
}

/** Σₙ xⁿ / (a(a+1)…(a+n)): P(a, x) = prefix · this; converges fast for x < a + 1 ([1] §6.2). */
function lowerSeries(a: number, x: number): number {
  let denominator = a;
  let term = 1 / a;
  let sum = term;
  const limit = iterationLimit(a);
  for (let n = 0; n < limit; n++) {
    denominator += 1;
    term *= x / denominator;
    sum += term;
    if (term < sum * 1e-17) return sum;
  }
  throw new Error(`incomplete gamma series did not converge for a = ${a}, x = ${x}`);
}

/** Continued fraction with Q(a, x) = prefix · this, by the modified Lentz method ([1] §6.2, §5.2). */
function upperFraction(a: number, x: number): number {
  let b = x + 1 - a;
  let c = 1 / TINY;
  let d = 1 / b;
  let h = d;
  const limit = iterationLimit(a);
  for (let i = 1; i < limit; i++) {
    const an = -i * (i - a);
    b += 2;
    d = an * d + b;
    if (Math.abs(d) < TINY) d = TINY;
    c = b + an / c;
    if (Math.abs(c) < TINY) c = TINY;
    d = 1 / d;
    const delta = d * c;
    h *= delta;
    if (Math.abs(delta - 1) <= Number.EPSILON) return h;
  }
  throw new Error(`incomplete gamma continued fraction did not converge for a = ${a}, x = ${x}`);
}

/**
 * ln P(a, x) (upper = false) or ln Q(a, x) (upper = true), a > 0, x ≥ 0. The side not computed
 * directly comes from the other by log1p(−e^{…}), so neither side loses precision near 0 or 1.
 */
function logRegularizedGamma(a: number, x: number, upper: boolean): number {
  if (x === 0) return upper ? 0 : -Infinity;
  if (x === Infinity) return upper ? -Infinity : 0;
  const prefix = logGammaPrefix(a, x);
  if (x < a + 1) {
    const logP = prefix + Math.log(lowerSeries(a, x));
    return upper ? Math.log1p(-Math.exp(logP)) : logP;
  }
  const logQ = prefix + Math.log(upperFraction(a, x));
  return upper ? logQ : Math.log1p(-Math.exp(logQ));
}

function regularizedGamma(a: number, x: number, upper: boolean): number {
  if (x === 0) return upper ? 1 : 0;
  if (x === Infinity) return upper ? 0 : 1;
  const prefix = logGammaPrefix(a, x);
  if (x < a + 1) {
    const logP = prefix + Math.log(lowerSeries(a, x));
    return upper ? -Math.expm1(logP) : Math.exp(logP);
  }
  const logQ = prefix + Math.log(upperFraction(a, x));
  return upper ? Math.exp(logQ) : -Math.expm1(logQ);
}

/**
 * Regularized lower incomplete gamma function P(a, x) = γ(a, x) / Γ(a) (series for x < a+1,
 * continued fraction otherwise; [1] §6.2).
 * @param a shape, finite and > 0
 * @param x upper limit, ≥ 0 (Infinity gives 1)
 * @returns P(a, x) ∈ [0, 1]
 * @throws {RangeError} when a is not a finite number > 0 or x is NaN or negative
 * @example regularizedGammaP(1, 2) // 1 − e⁻² = 0.8646647167633873
 */
export function regularizedGammaP(a: number, x: number): number {
  requireFinitePositive("a", a);
  requireNonNegative("x", x);
  return regularizedGamma(a, x, false);
}

/**
 * Regularized upper incomplete gamma function Q(a, x) = Γ(a, x) / Γ(a) = 1 − P(a, x), computed
 * directly (never as 1 − P) so that tiny tails keep full relative precision ([1] §6.2).
 * @param a shape, finite and > 0
 * @param x lower limit, ≥ 0 (Infinity gives 0)
 * @returns Q(a, x) ∈ [0, 1]; 0 only when the true value underflows a double (< ~5e-324)
 * @throws {RangeError} when a is not a finite number > 0 or x is NaN or negative
 * @example regularizedGammaQ(1, 2) // e⁻² = 0.1353352832366127
 */
export function regularizedGammaQ(a: number, x: number): number {
  requireFinitePositive("a", a);
  requireNonNegative("x", x);
  return regularizedGamma(a, x, true);
}

/**
 * Chi-square survival function P(χ²_dof > x) = Q(dof/2, x/2): the calibrated tail probability of
 * a squared Mahalanobis distance x under an n-dimensional Gaussian (dof = n). Relative accuracy
 * ≈1e-13 far into the tail (e.g. 1e-300); returns 0 only on true underflow.
 * @param x value (a squared distance); x ≤ 0 gives 1, Infinity gives 0
 * @param dof degrees of freedom, a positive integer
 * @returns P(χ²_dof > x)
 * @throws {RangeError} when dof is not a positive integer or x is NaN
 * @example chiSquareSurvival(9.348403604496147, 3) // 0.025
 */
export function chiSquareSurvival(x: number, dof: number): number {
  requireDof(dof);
  requireNotNaN("x", x);
  if (x <= 0) return 1;
  return regularizedGamma(dof / 2, x / 2, true);
}

/**
 * Natural log of the chi-square survival function, ln P(χ²_dof > x) = ln Q(dof/2, x/2), computed
 * from the log of the regularized upper incomplete gamma function itself (its prefix
 * a·ln y − y − ln Γ(a) and the continued fraction), never as the log of an underflowed
 * probability: it stays finite and accurate where P(χ²_dof > x) is far below the smallest double
 * (ln Q ≈ −1e6 for x ≈ 2e6). Scores, queue orders and "how rare" texts read this rather than
 * {@link chiSquareSurvival}, which is 0 beyond about 1e-323.
 * @param x value (a squared distance); x ≤ 0 gives 0, Infinity gives −Infinity
 * @param dof degrees of freedom, a positive integer
 * @returns ln P(χ²_dof > x) ≤ 0
 * @throws {RangeError} when dof is not a positive integer or x is NaN
 * @example logChiSquareSurvival(1600, 4) // −796.28 (the probability itself underflows to 0)
 */
export function logChiSquareSurvival(x: number, dof: number): number {
  requireDof(dof);
  requireNotNaN("x", x);
  if (x <= 0) return 0;
  return logRegularizedGamma(dof / 2, x / 2, true);
}

/**
 * Base-10 log of the chi-square survival function, log₁₀ P(χ²_dof > x): {@link logChiSquareSurvival}
 * divided by ln 10. −17.3 reads as "1 in 2 × 10¹⁷".
 * @param x value (a squared distance); x ≤ 0 gives 0, Infinity gives −Infinity
 * @param dof degrees of freedom, a positive integer
 * @throws {RangeError} when dof is not a positive integer or x is NaN
 * @example log10ChiSquareSurvival(1600, 4) // −345.82
 */
export function log10ChiSquareSurvival(x: number, dof: number): number {
  return logChiSquareSurvival(x, dof) / Math.LN10;
}

/**
 * Chi-square cumulative distribution function P(χ²_dof ≤ x) = P(dof/2, x/2).
 * @param x value; x ≤ 0 gives 0, Infinity gives 1
 * @param dof degrees of freedom, a positive integer
 * @returns P(χ²_dof ≤ x)
 * @throws {RangeError} when dof is not a positive integer or x is NaN
 * @example chiSquareCdf(9.487729036781154, 4) // 0.95
 */
export function chiSquareCdf(x: number, dof: number): number {
  requireDof(dof);
  requireNotNaN("x", x);
  if (x <= 0) return 0;
  return regularizedGamma(dof / 2, x / 2, false);
}

/**
 * Solves ln F(y) = ln target for y = x/2, where F is P(a, ·) (upper = false) or Q(a, ·) (upper = true)
 * and target ≤ ½ (so the solved side is the small, well-conditioned one). Newton–Halley iteration
 * on u = ln y with a bisection safeguard inside a shrinking bracket.
 */
function solveGammaTail(a: number, target: number, upper: boolean): number {
  const logTarget = Math.log(target);
  const dof = 2 * a;

  // Start: Wilson–Hilferty cube-root normal approximation [5]; for the lower tail also the
  // small-x limit P(a, y) ≈ y^a / Γ(a+1), and keep whichever start lands closer.
  const z = upper ? -normalQuantile(target) : normalQuantile(target);
  const base = 1 - 2 / (9 * dof) + z * Math.sqrt(2 / (9 * dof));
  let u = base > 0 ? Math.log((dof * base * base * base) / 2) : Number.NaN;
  if (!upper) {
    const uSmall = (logTarget + lnGammaPositive(a + 1)) / a;
    // P(a, y) = y^a/Γ(a+1)·(1 − a·y/(a+1) + O(y²)): below y ≈ 4e-18 the limit is exact to double
    // (and it also returns the true underflow to 0 for, e.g., p = 1e-300 with dof = 1).
    if (uSmall < -40) {
      // y = (p·Γ(a+1))^{1/a} by pow when the product is a normal double: exp(ln …) would add the
      // rounding of a logarithm of size ~700 (≈1e-13 relative).
      const product = target * Math.exp(lnGammaPositive(a + 1));
      const y = product >= 2.2250738585072014e-308 && product < Infinity ? Math.pow(product, 1 / a) : Math.exp(uSmall);
      return 2 * y;
    }
    const missSmall = Math.abs(logRegularizedGamma(a, Math.exp(uSmall), false) - logTarget);
    const missWh = Number.isFinite(u) ? Math.abs(logRegularizedGamma(a, Math.exp(u), false) - logTarget) : Infinity;
    if (!(missWh <= missSmall)) u = uSmall;
  } else if (!Number.isFinite(u)) {
    u = Math.log(a);
  }

  let lo = -Infinity;
  let hi = Infinity;
  for (let iteration = 0; iteration < 200; iteration++) {
    const y = Math.exp(u);
    const logF = logRegularizedGamma(a, y, upper);
    const g = logF - logTarget;
    if (g === 0) return 2 * y;
    // P increases with y, Q decreases: keep the root inside (lo, hi).
    if (g > 0 !== upper) hi = u;
    else lo = u;
    if (!Number.isFinite(g)) {
      // ln F = −∞ (y underflowed or overflowed): no slope to follow, so bisect or step outward.
      u = Number.isFinite(lo) && Number.isFinite(hi) ? 0.5 * (lo + hi) : Number.isFinite(hi) ? hi - 1 : lo + 1;
      continue;
    }

    // d ln F / du = ± y·f(y)/F(y), f the gamma(a) density: ln(y·f) = logGammaPrefix.
    const slope = (upper ? -1 : 1) * Math.exp(logGammaPrefix(a, y) - logF);
    // d² ln F / du² = slope·(a − y) − slope²  (from d ln(y·f)/du = a − y).
    const curvature = slope * (a - y) - slope * slope;
    let du = -g / slope;
    const halley = 1 - (g * curvature) / (2 * slope * slope);
    if (halley > 0.5 && halley < 2) du /= halley;
    if (!Number.isFinite(du)) du = Number.NaN;

    let next = u + du;
    if (!(next > lo && next < hi)) {
      if (Number.isFinite(lo) && Number.isFinite(hi)) next = 0.5 * (lo + hi);
      else next = Number.isFinite(hi) ? hi - 1 : lo + 1;
    }
    if (Math.abs(next - u) <= 1e-15 * Math.max(1, Math.abs(u)) || hi - lo <= 1e-15 * Math.max(1, Math.abs(u))) {
      return 2 * Math.exp(next);
    }
    u = next;
  }
  return 2 * Math.exp(u);
}

/**
 * Chi-square quantile: the x with P(χ²_dof ≤ x) = p, accurate to ~1e-13 relative. Wilson–Hilferty
 * start [5], then Newton–Halley steps on the log scale with a bisection safeguard; for p > ½ it
 * solves the upper tail 1 − p (exact in floating point) instead.
 * @param p lower-tail probability in [0, 1]; 0 gives 0, 1 gives Infinity
 * @param dof degrees of freedom, a positive integer
 * @returns x ≥ 0
 * @throws {RangeError} when p is outside [0, 1] or NaN, or dof is not a positive integer
 * @example chiSquareQuantile(0.975, 3) // 9.348403604496147
 */
export function chiSquareQuantile(p: number, dof: number): number {
  requireProbability("p", p);
  requireDof(dof);
  if (p === 0) return 0;
  if (p === 1) return Infinity;
  const a = dof / 2;
  return p <= 0.5 ? solveGammaTail(a, p, false) : solveGammaTail(a, 1 - p, true);
}

/**
 * Quantile of the standard gamma distribution: the y with P(a, y) = p, for any real shape a > 0
 * (the χ² quantile is 2·gammaQuantile(p, dof/2)). Exact Poisson (Garwood) limits for a count k
 * are gammaQuantile(α/2, k) and gammaQuantile(1 − α/2, k + 1); a real shape serves an effective
 * count such as Kish's.
 * @param p probability in [0, 1]; 0 gives 0, 1 gives Infinity
 * @param a shape, finite and > 0
 * @throws {RangeError} when p is outside [0, 1] or NaN, or a is not a finite number > 0
 * @example gammaQuantile(0.975, 1) // 3.6888794541139354 (= −ln 0.025)
 */
export function gammaQuantile(p: number, a: number): number {
  requireProbability("p", p);
  requireFinitePositive("a", a);
  if (p === 0) return 0;
  if (p === 1) return Infinity;
  return (p <= 0.5 ? solveGammaTail(a, p, false) : solveGammaTail(a, 1 - p, true)) / 2;
}

/** Continued fraction of the incomplete beta function, by the modified Lentz method ([1] §6.4). */
function betaFraction(a: number, b: number, x: number): number {
  const qab = a + b;
  const qap = a + 1;
  const qam = a - 1;
  let c = 1;
  let d = 1 - (qab * x) / qap;
  if (Math.abs(d) < TINY) d = TINY;
  d = 1 / d;
  let h = d;
  const limit = 1000 + 20 * Math.ceil(Math.sqrt(Math.max(a, b)));
  for (let m = 1; m < limit; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((qam + m2) * (a + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < TINY) d = TINY;
    c = 1 + aa / c;
    if (Math.abs(c) < TINY) c = TINY;
    d = 1 / d;
    h *= d * c;
    aa = (-(a + m) * (qab + m) * x) / ((a + m2) * (qap + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < TINY) d = TINY;
    c = 1 + aa / c;
    if (Math.abs(c) < TINY) c = TINY;
    d = 1 / d;
    const delta = d * c;
    h *= delta;
    if (Math.abs(delta - 1) <= 4 * Number.EPSILON) return h;
  }
  throw new Error(`incomplete beta continued fraction did not converge for a = ${a}, b = ${b}, x = ${x}`);
}

/**
 * Regularized incomplete beta function I_x(a, b) ([1] §6.4: the continued fraction on whichever
 * side converges fast, the other side by symmetry I_x(a, b) = 1 − I_{1−x}(b, a)).
 * @param x in [0, 1]
 * @param a, b shapes, finite and > 0
 * @throws {RangeError} when an argument is out of its domain
 * @example regularizedBeta(0.3, 2.5, 3.5) // 0.2967529892956661
 */
export function regularizedBeta(x: number, a: number, b: number): number {
  requireProbability("x", x);
  requireFinitePositive("a", a);
  requireFinitePositive("b", b);
  if (x === 0) return 0;
  if (x === 1) return 1;
  const logFront = lnGammaPositive(a + b) - lnGammaPositive(a) - lnGammaPositive(b) + a * Math.log(x) + b * Math.log1p(-x);
  if (x < (a + 1) / (a + b + 2)) return (Math.exp(logFront) * betaFraction(a, b, x)) / a;
  return 1 - (Math.exp(logFront) * betaFraction(b, a, 1 - x)) / b;
}

/**
 * ln I_x(a, b) from ln x and ln(1 − x), never as the log of an underflowed probability: on the side
 * where the continued fraction converges the log is its prefix a·ln x + b·ln(1 − x) − ln B(a, b)
 * plus the log of the fraction; on the other side ln(1 − I_{1−x}(b, a)) by log1p ([1] §6.4).
 */
function logRegularizedBetaFromLogs(x: number, lnX: number, ln1mX: number, a: number, b: number): number {
  const lnBeta = lnGammaPositive(a) + lnGammaPositive(b) - lnGammaPositive(a + b);
  if (x < (a + 1) / (a + b + 2)) return a * lnX + b * ln1mX - lnBeta + Math.log(betaFraction(a, b, x) / a);
  return Math.log1p(-Math.exp(a * lnX + b * ln1mX - lnBeta + Math.log(betaFraction(b, a, 1 - x) / b)));
}

/**
 * Natural log of the F survival function, ln P(F(d1, d2) > f), from the log of the regularized
 * incomplete beta function itself: finite and accurate where the probability underflows a double
 * (f = 1e12 with 8 and 192 degrees of freedom gives log₁₀ ≈ −1014). x = d2/(d2 + d1·f) and 1 − x
 * come from their logs, so neither side cancels for huge or tiny f.
 * @param f value; f ≤ 0 gives 0, Infinity gives −Infinity
 * @param d1, d2 degrees of freedom, finite and > 0
 * @throws {RangeError} when f is NaN or a degree of freedom is not a finite number > 0
 * @example logFSurvival(40, 8, 192) / Math.LN10 // −36.3018 (SciPy: log10 of f.sf(40, 8, 192))
 */
export function logFSurvival(f: number, d1: number, d2: number): number {
  requireNotNaN("f", f);
  requireFinitePositive("d1", d1);
  requireFinitePositive("d2", d2);
  if (f <= 0) return 0;
  if (f === Infinity) return -Infinity;
  const lnDenominator = Math.log(d2 + d1 * f);
  const x = d2 / (d2 + d1 * f);
  return logRegularizedBetaFromLogs(x, Math.log(d2) - lnDenominator, Math.log(d1 * f) - lnDenominator, d2 / 2, d1 / 2);
}

/**
 * Survival function of Snedecor's F distribution, P(F(d1, d2) > f) = I_{d2/(d2 + d1·f)}(d2/2, d1/2).
 * @param f value; f ≤ 0 gives 1
 * @param d1, d2 degrees of freedom, finite and > 0
 * @example fSurvival(2.6, 8, 192) // 0.0101365
 */
export function fSurvival(f: number, d1: number, d2: number): number {
  requireNotNaN("f", f);
  requireFinitePositive("d1", d1);
  requireFinitePositive("d2", d2);
  if (f <= 0) return 1;
  if (f === Infinity) return 0;
  return regularizedBeta(d2 / (d2 + d1 * f), d2 / 2, d1 / 2);
}

/**
 * Upper quantile of the F distribution: the f with P(F(d1, d2) > f) = tailProbability, by
 * bisection on the monotone survival function (to 1e-12 relative).
 * @param tailProbability in (0, 1)
 * @example fUpperQuantile(0.01, 8, 192) // 2.6050504410129944
 */
export function fUpperQuantile(tailProbability: number, d1: number, d2: number): number {
  requireProbability("tailProbability", tailProbability);
  if (tailProbability === 0) return Infinity;
  if (tailProbability === 1) return 0;
  let lo = 0;
  let hi = 1;
  while (fSurvival(hi, d1, d2) > tailProbability) hi *= 2;
  for (let i = 0; i < 200 && hi - lo > 1e-12 * hi; i++) {
    const mid = 0.5 * (lo + hi);
    if (fSurvival(mid, d1, d2) > tailProbability) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}

/**
 * Upper-tail chi-square quantile: the x with P(χ²_dof > x) = tailProbability. Use this rather than
 * chiSquareQuantile(1 − q) for small q (a cutoff at q = 1e-20 is not representable as 1 − q).
 * @param tailProbability upper-tail probability in [0, 1]; 1 gives 0, 0 gives Infinity
 * @param dof degrees of freedom, a positive integer
 * @returns x ≥ 0
 * @throws {RangeError} when tailProbability is outside [0, 1] or NaN, or dof is not a positive integer
 * @example chiSquareUpperQuantile(0.001, 4) // 18.466826952903173
 */
export function chiSquareUpperQuantile(tailProbability: number, dof: number): number {
  requireProbability("tailProbability", tailProbability);
  requireDof(dof);
  if (tailProbability === 1) return 0;
  if (tailProbability === 0) return Infinity;
  const a = dof / 2;
  return tailProbability <= 0.5 ? solveGammaTail(a, tailProbability, true) : solveGammaTail(a, 1 - tailProbability, false);
}

/**
 * Standard normal quantile Φ⁻¹(p) by Wichura's algorithm AS 241 (PPND16, rational approximations
 * accurate to about 1e-16 relative; [4]).
 * @param p lower-tail probability in [0, 1]; 0 gives −Infinity, 1 gives Infinity
 * @returns z with Φ(z) = p
 * @throws {RangeError} when p is outside [0, 1] or NaN
 * @example normalQuantile(0.975) // 1.959963984540054
 */
export function normalQuantile(p: number): number {
  requireProbability("p", p);
  if (p === 0) return -Infinity;
  if (p === 1) return Infinity;
  const q = p - 0.5;
  if (Math.abs(q) <= 0.425) {
    const r = 0.180625 - q * q;
    return (
      (q *
        (((((((2.5090809287301226727e3 * r + 3.3430575583588128105e4) * r + 6.7265770927008700853e4) * r + 4.5921953931549871457e4) * r + 1.3731693765509461125e4) * r +
          1.9715909503065514427e3) *
          r +
          1.3314166789178437745e2) *
          r +
          3.387132872796366608)) /
      (((((((5.226495278852854561e3 * r + 2.8729085735721942674e4) * r + 3.930789580009271061e4) * r + 2.1213794301586595867e4) * r + 5.3941960214247511077e3) * r +
        6.871870074920579083e2) *
        r +
        4.2313330701600911252e1) *
        r +
        1)
    );
  }
  // Tails: r = √(−ln min(p, 1−p)); 1 − p is exact here because p > 0.925.
  let r = Math.sqrt(-Math.log(q < 0 ? p : 1 - p));
  let z: number;
  if (r <= 5) {
    r -= 1.6;
    z =
      (((((((7.7454501427834140764e-4 * r + 2.27238449892691845833e-2) * r + 2.4178072517745061177e-1) * r + 1.27045825245236838258) * r + 3.64784832476320460504) * r +
        5.7694972214606914055) *
        r +
        4.6303378461565452959) *
        r +
        1.42343711074968357734) /
      (((((((1.05075007164441684324e-9 * r + 5.475938084995344946e-4) * r + 1.51986665636164571966e-2) * r + 1.4810397642748007459e-1) * r + 6.8976733498510000455e-1) * r +
        1.6763848301838038494) *
        r +
        2.05319162663775882187) *
        r +
        1);
  } else {
    r -= 5;
    z =
      (((((((2.01033439929228813265e-7 * r + 2.71155556874348757815e-5) * r + 1.2426609473880784386e-3) * r + 2.6532189526576123093e-2) * r + 2.9656057182850489123e-1) * r +
        1.7848265399172913358) *
        r +
        5.4637849111641143699) *
        r +
        6.6579046435011037772) /
      (((((((2.04426310338993978564e-15 * r + 1.4215117583164458887e-7) * r + 1.8463183175100546818e-5) * r + 7.868691311456132591e-4) * r + 1.48753612908506148525e-2) * r +
        1.3692988092273580531e-1) *
        r +
        5.9983220655588793769e-1) *
        r +
        1);
  }
  return q < 0 ? -z : z;
}
