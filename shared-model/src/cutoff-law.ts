/**
 * A cutoff that flags the asked share of *new* payments, not of the training rows. The training
 * rows' own distances are optimistic: each row helped fit the mean and covariance it is measured
 * against, so its d² runs small, and the in-sample (1 − rate) quantile flags more new payments than
 * asked — about 2 % instead of 1 % for 300 rows of 8 columns (simulated). Two remedies, by how many
 * rows the tail holds:
 *
 * - **Deleted distances** for a scoring model whose tail holds at least {@link MIN_TAIL_ROWS}
 *   rows: each row's distance to the model fitted without it. For the classical full-covariance
 *   (maximum-likelihood, ÷m) estimate it follows from the in-sample distance by Sherman–Morrison:
 *   with W the scatter matrix, x − x̄₍ᵢ₎ = m/(m − 1)·e and W₍ᵢ₎ = W − m/(m − 1)·eeᵀ give
 *     d²₍ᵢ₎ = m·d²ᵢ / (m − 1 − d²ᵢ).
 *   Their empirical quantile makes no Gaussian assumption about the tail, which real payments need.
 * - **The predictive law** where a tail holds fewer rows (a quantile of two or three rows is noise):
 *   under the model, a new point's d² against the m-row maximum-likelihood fit is exactly
 *     d²_new ~ n(m + 1)/(m − n) · F(n, m − n)
 *   (Hotelling's T² for a new observation; e.g. Mardia, Kent & Bibby 1979, "Multivariate
 *   Analysis", §3.5, with the ÷m covariance rescaled; from memory). Over several segment models c
 *   solves Σₛ shareₛ · P(d²_new,ₛ > c) = rate, shareₛ the share of training traffic each scores.
 *
 * Other estimators (shrinkage, robust) or the diagonal shape have no closed form here; they keep
 * the in-sample quantile and the fit says so.
 */
import { chiSquareSurvival } from "./distributions";
import { cutoffForFlagRate, type FlagRateCutoff } from "./cutoff";
import { predictiveTail } from "./tail-law";

/** Fewest tail rows (rate × rows of the smallest scoring model) for the empirical deleted-distance quantile. */
export const MIN_TAIL_ROWS = 10;

/** How the cutoff was chosen. */
export type CutoffLaw = "deleted-distance" | "predictive" | "in-sample";

/** One scoring model's training rows and the share of training traffic it scored. */
export interface ScoringModelTraffic {
  key: string;
  /** Rows the model was fitted on (m). */
  rows: number;
  /** Training rows it scored in the cutoff pass. */
  scored: number;
}

/** A cutoff with the law that chose it and why, for the fit's report. */
export interface LawCutoff extends FlagRateCutoff {
  law: CutoffLaw;
  /** One sentence: the law and the reason, for the fit output. */
  lawReason: string;
  /** Keys of the scoring models read with the predictive law; their payments report its tail probability (`tail-law.ts`). */
  predictiveKeys: string[];
}

/**
 * Deleted (leave-one-out) squared distance of a training row from its in-sample squared distance
 * under the classical maximum-likelihood fit of m rows: m·d² / (m − 1 − d²).
 * @example deletedDistance(9, 300) // 9.28
 */
export function deletedDistance(inSampleMahalanobisSq: number, rows: number): number {
  const room = rows - 1 - inSampleMahalanobisSq;
  return room > 0 ? (rows * inSampleMahalanobisSq) / room : Number.MAX_VALUE;
}

/**
 * Chooses the cutoff c so that new payments are flagged at `rate`: Σₛ shareₛ · Pₛ(d² > c) = rate
 * over the scoring models, where Pₛ is the empirical share of model s's deleted distances above c
 * when its tail holds at least {@link MIN_TAIL_ROWS} rows (no Gaussian assumption), else the
 * predictive law. The in-sample quantile when `deleted` is null (no closed form for the estimator).
 * @param inSample training rows' in-sample d² (a sample of them)
 * @param deleted the same rows' deleted d², or null
 * @param model index into `traffic` of each sampled row's scoring model
 * @param traffic the scoring models, their rows and how many training rows each scored
 * @example outOfSampleCutoff({ inSample, deleted, model, traffic: [{ key: "*", rows: 300, scored: 300 }], n: 8, rate: 0.01 }).law // "predictive"
 */
export function outOfSampleCutoff(input: {
  inSample: Float64Array;
  deleted: Float64Array | null;
  model?: Uint16Array;
  traffic: readonly ScoringModelTraffic[];
  n: number;
  rate: number;
}): LawCutoff {
  const { inSample, deleted, traffic, n, rate } = input;
  if (deleted === null) {
    const cut = cutoffForFlagRate(inSample, rate, n);
    return {
      ...cut,
      law: "in-sample",
      predictiveKeys: [],
      lawReason:
        "in-sample quantile of the training distances (no closed-form out-of-sample law for this estimator or shape; new payments may be flagged somewhat more often than asked)",
    };
  }
  const model = input.model ?? new Uint16Array(deleted.length);
  const total = traffic.reduce((s, t) => s + t.scored, 0);
  // Each model's sampled deleted distances, sorted, for its empirical tail.
  const samples = traffic.map((_, k) => Float64Array.from(deleted.filter((_, i) => model[i] === k)).sort());
  const empirical = traffic.map((t) => t.scored > 0 && rate * t.rows >= MIN_TAIL_ROWS);
  const readsPredictive = traffic.map((_, k) => !empirical[k] || samples[k].length === 0);
  const tailShare = (k: number, c: number): number => {
    const sorted = samples[k];
    if (readsPredictive[k]) return predictiveTail(c, n, traffic[k].rows);
    let a = 0;
    let b = sorted.length;
    while (a < b) {
      const mid = (a + b) >>> 1;
      if (sorted[mid] > c) b = mid;
      else a = mid + 1;
    }
    return (sorted.length - a) / sorted.length;
  };
  const expected = (c: number): number => traffic.reduce((s, t, k) => (t.scored > 0 ? s + (t.scored / total) * tailShare(k, c) : s), 0);
  let lo = 0;
  let hi = Math.max(1, n);
  while (expected(hi) > rate) hi *= 2;
  for (let i = 0; i < 200 && hi - lo > 1e-12 * hi; i++) {
    const mid = 0.5 * (lo + hi);
    if (expected(mid) > rate) lo = mid;
    else hi = mid;
  }
  const c = hi;
  const predictive = traffic.filter((t, k) => t.scored > 0 && !empirical[k]);
  const law: CutoffLaw = predictive.length === 0 ? "deleted-distance" : "predictive";
  const lawReason =
    predictive.length === 0
      ? `empirical quantile of the deleted (leave-one-out) distances: every model's tail holds at least ${MIN_TAIL_ROWS} rows`
      : `predictive law of a new payment, n(m + 1)/(m − n)·F(n, m − n), for ${predictive.map((t) => `'${t.key}' (${formatRows(rate * t.rows)} in its tail)`).join(", ")}` +
        (predictive.length < traffic.filter((t) => t.scored > 0).length
          ? `; deleted (leave-one-out) distances for the models whose tail holds at least ${MIN_TAIL_ROWS} rows`
          : "");
  const predictiveKeys = traffic.filter((_, k) => readsPredictive[k]).map((t) => t.key);
  return { mahalanobisSq: c, tailProbability: chiSquareSurvival(c, n), flagRate: expected(c), law, lawReason, predictiveKeys };
}

function formatRows(x: number): string {
  return `${Number.isInteger(x) ? x : x.toFixed(1)} row${x === 1 ? "" : "s"}`;
}
