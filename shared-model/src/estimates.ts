/**
 * Honest estimates from reviewed payments. Only some payments are ever labelled: every flagged one
 * (inclusion probability π = 1) and a random audit sample of the others (π = the sampling rate).
 * Weighting each label by 1/π gives unbiased totals for all traffic (Horvitz & Thompson 1952, "A
 * generalization of sampling without replacement from a finite universe", JASA 47:663–685), from
 * which prevalence, recall of the flagging rule and precision among flags follow, each with a
 * confidence interval.
 *
 * Variance: the audit draw is Poisson sampling (each payment drawn independently with its own π),
 * for which the HT total T̂ = Σ_s yᵢ/πᵢ has the unbiased variance estimator
 *   v(T̂) = Σ_s (1 − πᵢ)/πᵢ² · yᵢ²
 * (Särndal, Swensson & Wretman 1992, "Model Assisted Survey Sampling", Springer: ch. 3 on Poisson
 * sampling; chapter numbers from memory). Ratios R = T_a / T_b (recall, precision, and prevalence
 * when the payment count is itself estimated) use Taylor linearisation: with
 * zᵢ = (aᵢ − R̂·bᵢ)/T̂_b, v(R̂) = Σ_s (1 − πᵢ)/πᵢ²·zᵢ² (ibid., ch. 5 on ratio estimation).
 * The standard errors are reported; the intervals are not built from them. A Wald interval
 * collapses exactly where it matters: with no missed fraud in the audit sample recall reads
 * "100 % (100–100 %)", with one "48 % (0–96 %)". Every flag is decided (π = 1, a census), so what
 * is unknown is the sampled part — above all the fraud the rule misses, known from k audit-sample
 * frauds. Each sampled part (audit frauds the rule misses, audit frauds it flags, audit legitimate
 * payments it flags) gets an exact Poisson interval for its count (Garwood 1936; Kish's effective
 * count (Σw)²/Σw² and scale Σw²/Σw when weights differ, so equal weights give k and 1/π), and
 * the figure's interval follows by monotone mapping: recall A/(A + M) is lowest at the fewest
 * flagged and the most missed frauds. When a figure rests on two sampled parts each gets half the
 * error (Bonferroni). A figure with no sampled part is exact and says so (`exact`), with no
 * interval width. These intervals are about **this period's payments** (the finite population the
 * labels were drawn from). For future traffic the rule's recall and precision are also binomial
 * shares: `future` widens each with the Wilson interval over the decided counts at both ends.
 */
import { InputError } from "./input-error";
import { garwoodInterval, wilsonInterval, type Bounds } from "./intervals";

/**
 * Fewest audit-sample frauds (Kish effective count, see {@link RateEstimates.effectiveAuditFrauds})
 * behind an estimate before it is trusted. Why 10: the missed fraud — the part of recall and
 * prevalence the flags cannot see — is known only through these labels; with k of them its
 * relative standard error is about 1/√k (≈ 32 % at 10), and a normal approximation to such a count
 * is commonly accepted from about 10 events (the "at least 10 successes" rule of thumb for Wald
 * intervals; common practice). Below that the interval itself is unreliable, not just wide.
 */
export const MIN_AUDIT_FRAUDS = 10;

/** A bad argument, naming the field and the rule it broke. */
export class EstimateInputError extends InputError {}

/**
 * An estimated share with its standard error and confidence interval (all null when undefined).
 * `exact` is true when the figure rests on decided payments only (every flag decided, no sampled
 * part): then low = high = value, and the display says "exact" rather than printing a zero-width
 * interval.
 */
export interface Estimate {
  value: number | null;
  standardError: number | null;
  low: number | null;
  high: number | null;
  exact: boolean;
}

/** The labelled rows: parallel arrays, one entry per reviewed payment. */
export interface ReviewedLabels {
  /** true / 1 = confirmed fraud, false / 0 = legitimate. */
  fraud: ArrayLike<boolean | number>;
  /** true / 1 when the rule being evaluated flags the payment (d² > cutoff). */
  flagged: ArrayLike<boolean | number>;
  /** 1/π per row: 1 for flags, 1/rate for audit draws; finite and ≥ 1. */
  weights: ArrayLike<number>;
}

/** Options of {@link estimateRates}. */
export interface EstimateOptions {
  /**
   * Payments scored in the period the labels cover. When absent it is estimated by Σ weights (the
   * HT estimate of the population size) and prevalence becomes a ratio estimate.
   */
  totalPayments?: number;
  /** Two-sided confidence level of the intervals, in (0, 1); default 0.95. */
  confidence?: number;
  /** Threshold of the too-few-labels verdict; default {@link MIN_AUDIT_FRAUDS}. */
  minAuditFrauds?: number;
}

/** Estimates for all traffic from weighted labels. */
export interface RateEstimates {
  /** Payments in the period (given, or Σ weights). */
  totalPayments: number;
  totalPaymentsSource: "given" | "estimated";
  /** Labelled rows, and how many are fraud. */
  labelled: number;
  labelledFraud: number;
  /** Fraud rows that came from the audit sample (π < 1). */
  auditFrauds: number;
  /**
   * Effective number of audit-sample frauds, (Σw)² / Σw² over those rows (Kish 1965, "Survey
   * Sampling"; equal to the count when their weights are equal).
   */
  effectiveAuditFrauds: number;
  /** HT estimate of the number of frauds among all payments. */
  estimatedFrauds: number;
  /** HT estimate of the number of payments the rule flags. */
  estimatedFlags: number;
  /** Share of all payments that are fraud. */
  prevalence: Estimate;
  /** Share of all fraud that the rule flags. */
  recall: Estimate;
  /** Share of the rule's flags that are fraud. */
  precision: Estimate;
  /**
   * The same rule on future traffic (recall and precision as probabilities, not this period's
   * shares): the period's interval widened by the binomial (Wilson) interval of the decided counts.
   * Wider than the period's; what a cutoff decision for the coming weeks should read.
   */
  future: { recall: Estimate; precision: Estimate };
  confidence: number;
  /** True when an estimate should not be trusted; `reasons` says why. */
  tooFewLabels: boolean;
  reasons: string[];
}

/**
 * Prevalence, recall and precision for all traffic from weighted labels, with intervals and a
 * too-few-labels verdict. The rule being evaluated may differ from the one that chose the flags
 * (e.g. a new cutoff): any payment it flags that was not a flag then is known through the audit
 * sample, with its weight.
 *
 * Verdict (`tooFewLabels`) with a reason when: no label is fraud; the labels are not a census and
 * fewer than `minAuditFrauds` effective audit-sample frauds stand behind the missed-fraud part; or
 * the labels cover fewer payments than `totalPayments` with no audit sample at all (the unreviewed
 * payments then had inclusion probability 0, and nothing can be said about them). A census
 * (every weight 1 and `totalPayments` absent or equal to the rows) is exact and passes.
 *
 * @throws EstimateInputError naming the field: lengths differ, no rows, a label or flag that is not
 *   boolean/0/1, a weight that is not a finite number ≥ 1, a bad total, confidence or threshold
 * @example
 * estimateRates({ fraud, flagged, weights }, { totalPayments: 60000 }).recall // { value: 0.61, low: 0.48, high: 0.74, … }
 */
export function estimateRates(labels: ReviewedLabels, options: EstimateOptions = {}): RateEstimates {
  const m = labels.fraud.length;
  if (m === 0) throw new EstimateInputError("fraud", "must hold at least one labelled payment. Actual: none");
  if (labels.flagged.length !== m) throw new EstimateInputError("flagged", `must have one entry per label (${m}). Actual: ${labels.flagged.length}`);
  if (labels.weights.length !== m) throw new EstimateInputError("weights", `must have one weight per label (${m}). Actual: ${labels.weights.length}`);
  const confidence = options.confidence ?? 0.95;
  if (typeof confidence !== "number" || !(confidence > 0 && confidence < 1)) {
    throw new EstimateInputError("confidence", `must be a level strictly between 0 and 1, e.g. 0.95. Actual: ${String(confidence)}`);
  }
  const minAuditFrauds = options.minAuditFrauds ?? MIN_AUDIT_FRAUDS;
  if (typeof minAuditFrauds !== "number" || !(minAuditFrauds >= 0) || minAuditFrauds === Infinity) {
    throw new EstimateInputError("minAuditFrauds", `must be a finite number ≥ 0. Actual: ${String(minAuditFrauds)}`);
  }

  const y = new Uint8Array(m);
  const f = new Uint8Array(m);
  const w = new Float64Array(m);
  let sumW = 0;
  let tY = 0; // Σ y/π: frauds
  let tF = 0; // Σ f/π: flags
  let tYF = 0; // Σ y·f/π: flagged frauds
  let labelledFraud = 0;
  let auditFrauds = 0;
  let auditFraudW = 0;
  let auditFraudW2 = 0;
  let allCensus = true;
  for (let i = 0; i < m; i++) {
    y[i] = readFlag(labels.fraud[i], `fraud[${i}]`);
    f[i] = readFlag(labels.flagged[i], `flagged[${i}]`);
    const wi = labels.weights[i];
    if (typeof wi !== "number" || !(wi >= 1) || wi === Infinity) {
      throw new EstimateInputError(`weights[${i}]`, `must be a finite number ≥ 1 (1 / inclusion probability). Actual: ${String(wi)}`);
    }
    w[i] = wi;
    sumW += wi;
    tY += y[i] * wi;
    tF += f[i] * wi;
    tYF += y[i] * f[i] * wi;
    if (wi > 1) allCensus = false;
    if (y[i] === 1) {
      labelledFraud++;
      if (wi > 1) {
        auditFrauds++;
        auditFraudW += wi;
        auditFraudW2 += wi * wi;
      }
    }
  }

  let totalPayments = sumW;
  let totalPaymentsSource: RateEstimates["totalPaymentsSource"] = "estimated";
  if (options.totalPayments !== undefined) {
    const n = options.totalPayments;
    if (typeof n !== "number" || !Number.isFinite(n) || n < m) {
      throw new EstimateInputError("totalPayments", `must be a finite number ≥ the labelled rows (${m}). Actual: ${String(n)}`);
    }
    totalPayments = n;
    totalPaymentsSource = "given";
  }

  const census = allCensus && (totalPaymentsSource === "estimated" || totalPayments === m);
  // Σ_s (1 − π)/π² · u² with π = 1/w: (1 − 1/w)·w² = w(w − 1).
  const varianceOf = (u: (i: number) => number): number => {
    let v = 0;
    for (let i = 0; i < m; i++) {
      if (w[i] > 1) {
        const ui = u(i);
        v += w[i] * (w[i] - 1) * ui * ui;
      }
    }
    return v;
  };
  const ratioSe = (r: number, den: number, a: (i: number) => number, b: (i: number) => number): number => Math.sqrt(varianceOf((i) => (a(i) - r * b(i)) / den));

  // Decided (w = 1) and sampled (w > 1) parts of the three counts the figures are made of.
  const flaggedFraud = new PartTotals();
  const flaggedLegit = new PartTotals();
  const missedFraud = new PartTotals();
  let auditWeight = 0;
  let auditRows = 0;
  for (let i = 0; i < m; i++) {
    if (w[i] > 1) {
      auditWeight += w[i];
      auditRows++;
    }
    if (f[i] === 1) (y[i] === 1 ? flaggedFraud : flaggedLegit).add(w[i]);
    else if (y[i] === 1) missedFraud.add(w[i]);
  }
  const sampling = auditRows > 0;
  // An audit sample draws from every unflagged payment, so the missed fraud is a sampled part even
  // when no audit fraud was drawn (k = 0, at the typical audit weight). The parts flagged by the
  // rule but not decided as flags are seen only through audit rows the rule flags.
  const typicalWeight = sampling ? auditWeight / auditRows : 1;
  const missedSampled = sampling;
  const frauds = flaggedFraud.plus(missedFraud);

  const exact = (value: number): Estimate => ({ value, standardError: 0, low: value, high: value, exact: true });
  const undefinedEstimate: Estimate = { value: null, standardError: null, low: null, high: null, exact: false };
  const split = (parts: number): number => 1 - (1 - confidence) / Math.max(1, parts);

  // Recall A/(A + M): lowest with the fewest flagged and the most missed frauds.
  let recall: Estimate = undefinedEstimate;
  if (tY > 0) {
    const value = tYF / tY;
    const parts = (flaggedFraud.sampled ? 1 : 0) + (missedSampled ? 1 : 0);
    const se = ratioSe(
      value,
      tY,
      (i) => y[i] * f[i],
      (i) => y[i],
    );
    if (!census && !sampling) recall = { value, standardError: se, low: null, high: null, exact: false };
    else if (parts === 0) recall = exact(value);
    else {
      const a = flaggedFraud.bounds(split(parts), typicalWeight, false);
      const mm = missedFraud.bounds(split(parts), typicalWeight, missedSampled);
      recall = { value, standardError: se, low: share(a.low, a.low + mm.high), high: share(a.high, a.high + mm.low), exact: false };
    }
  }
  // Precision A/(A + B): lowest with the fewest flagged frauds and the most flagged legitimate.
  let precision: Estimate = undefinedEstimate;
  if (tF > 0) {
    const value = tYF / tF;
    const parts = (flaggedFraud.sampled ? 1 : 0) + (flaggedLegit.sampled ? 1 : 0);
    const se = ratioSe(
      value,
      tF,
      (i) => y[i] * f[i],
      (i) => f[i],
    );
    if (parts === 0) precision = exact(value);
    else {
      const a = flaggedFraud.bounds(split(parts), typicalWeight, false);
      const b = flaggedLegit.bounds(split(parts), typicalWeight, false);
      precision = { value, standardError: se, low: share(a.low, a.low + b.high), high: share(a.high, a.high + b.low), exact: false };
    }
  }
  // Prevalence (frauds)/N: every audit fraud is one sampled part, whichever side of the rule it is.
  let prevalence: Estimate;
  {
    const value = tY / totalPayments;
    const se =
      totalPaymentsSource === "given"
        ? Math.sqrt(varianceOf((i) => y[i])) / totalPayments
        : ratioSe(
            value,
            sumW,
            (i) => y[i],
            () => 1,
          );
    if (census) prevalence = exact(value);
    else if (!sampling) prevalence = { value, standardError: se, low: null, high: null, exact: false };
    else {
      const all = frauds.bounds(confidence, typicalWeight, true);
      prevalence = { value, standardError: se, low: Math.min(1, all.low / totalPayments), high: Math.min(1, all.high / totalPayments), exact: false };
    }
  }
  const future = {
    recall: widenForFuture(recall, flaggedFraud, missedFraud, split(2), typicalWeight, missedSampled, confidence),
    precision: widenForFuture(precision, flaggedFraud, flaggedLegit, split(2), typicalWeight, false, confidence),
  };

  const effectiveAuditFrauds = auditFraudW2 > 0 ? (auditFraudW * auditFraudW) / auditFraudW2 : 0;
  const reasons: string[] = [];
  if (labelledFraud === 0) {
    reasons.push("no label is fraud: recall is undefined and prevalence cannot be told from zero");
  }
  if (allCensus && !census) {
    reasons.push(
      `the labels cover ${m} of ${totalPayments} payments and none comes from an audit sample (every weight is 1): ` +
        "the unreviewed payments had no chance of review, so prevalence and recall describe the reviewed payments only",
    );
  } else if (!census && labelledFraud > 0 && effectiveAuditFrauds < minAuditFrauds) {
    reasons.push(
      `only ${formatCount(effectiveAuditFrauds)} effective audit-sample frauds (${auditFrauds} rows); at least ${minAuditFrauds} are needed ` +
        "before the missed-fraud part of recall and prevalence, and its interval, can be trusted",
    );
  }
  return {
    totalPayments,
    totalPaymentsSource,
    labelled: m,
    labelledFraud,
    auditFrauds,
    effectiveAuditFrauds,
    estimatedFrauds: tY,
    estimatedFlags: tF,
    prevalence,
    recall,
    precision,
    future,
    confidence,
    tooFewLabels: reasons.length > 0,
    reasons,
  };
}

function readFlag(value: boolean | number, field: string): 0 | 1 {
  if (value === true || value === 1) return 1;
  if (value === false || value === 0) return 0;
  throw new EstimateInputError(field, `must be true/1 or false/0. Actual: ${String(value)}`);
}

/** a/b, or null when b is 0. */
function share(a: number, b: number): number | null {
  return b > 0 ? Math.min(1, Math.max(0, a / b)) : null;
}

/**
 * A weighted count split into its decided part (weight 1, known exactly) and its sampled part
 * (weight > 1, an estimate), with an exact interval for the sampled part.
 */
class PartTotals {
  decided = 0;
  sampledWeight = 0;
  sampledWeightSq = 0;
  sampledRows = 0;

  add(weight: number): void {
    if (weight > 1) {
      this.sampledWeight += weight;
      this.sampledWeightSq += weight * weight;
      this.sampledRows++;
    } else this.decided += weight;
  }

  get sampled(): boolean {
    return this.sampledRows > 0;
  }

  plus(other: PartTotals): PartTotals {
    const sum = new PartTotals();
    sum.decided = this.decided + other.decided;
    sum.sampledWeight = this.sampledWeight + other.sampledWeight;
    sum.sampledWeightSq = this.sampledWeightSq + other.sampledWeightSq;
    sum.sampledRows = this.sampledRows + other.sampledRows;
    return sum;
  }

  /**
   * Bounds of the total: decided + scale · Garwood(k) with k = (Σw)²/Σw² and scale = Σw²/Σw over the
   * sampled rows (k rows and weight 1/π when the weights are equal). With no sampled row the total
   * is exact, unless `drawnFrom` says a sample was drawn from this part (then k = 0 at
   * `typicalWeight`: nothing seen is not the same as nothing there).
   */
  bounds(confidence: number, typicalWeight: number, drawnFrom: boolean): Bounds {
    if (this.sampledRows === 0) {
      if (!drawnFrom) return { low: this.decided, high: this.decided };
      return { low: this.decided, high: this.decided + typicalWeight * garwoodInterval(0, confidence).high };
    }
    const k = (this.sampledWeight * this.sampledWeight) / this.sampledWeightSq;
    const scale = this.sampledWeightSq / this.sampledWeight;
    const g = garwoodInterval(k, confidence);
    return { low: this.decided + scale * g.low, high: this.decided + scale * g.high };
  }
}

/**
 * The future-traffic version of a share num/(num + other): the Wilson interval of the decided
 * counts, taken at both ends of the period's interval so that it holds the sampling uncertainty too.
 */
function widenForFuture(
  period: Estimate,
  num: PartTotals,
  other: PartTotals,
  partConfidence: number,
  typicalWeight: number,
  otherDrawnFrom: boolean,
  confidence: number,
): Estimate {
  if (period.value === null || period.low === null || period.high === null) return { ...period, exact: false };
  const a = num.bounds(partConfidence, typicalWeight, false);
  const b = other.bounds(partConfidence, typicalWeight, otherDrawnFrom);
  const lowEnd = a.low + b.high > 0 ? wilsonInterval(a.low, a.low + b.high, confidence).low : 0;
  const highEnd = a.high + b.low > 0 ? wilsonInterval(a.high, a.high + b.low, confidence).high : 1;
  return { value: period.value, standardError: period.standardError, low: Math.min(lowEnd, period.low), high: Math.max(highEnd, period.high), exact: false };
}

function formatCount(x: number): string {
  return Number.isInteger(x) ? String(x) : x.toFixed(1);
}
