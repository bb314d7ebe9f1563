/**
 * Choosing the cutoff from labelled payments: precision, recall, F1 and flag rate at every
 * candidate cutoff on d², the precision–recall (PR) curve and its area, and three ways of picking
 * one cutoff (best F1; best recall that fits the analysts' capacity; least expected cost). Labels
 * may carry weights 1/π (π = inclusion probability, Horvitz & Thompson 1952), so counts are
 * estimates for all traffic, not just for the reviewed rows; unweighted labels count once each.
 *
 * Pure functions over arrays: the CLI (`isodense tune`), the worker and the review app's cutoff
 * control call the same code. One sort, O(m log m), then linear sweeps.
 *
 * Conventions: a payment is flagged when d² > cutoff (as everywhere in isodense). Precision is
 * TP / (TP + FP), recall TP / (TP + FN), F1 = 2·TP / (2·TP + FP + FN) (the harmonic mean of
 * precision and recall; 0 when TP = 0), flag rate (TP + FP) / total weight.
 */
import { InputError } from "./input-error";
import { parseArtifact, sealArtifact, type ModelArtifact, type UnsealedArtifact } from "./artifact";
import { chiSquareSurvival } from "./distributions";
import { logDensityAt } from "./log-density";
import { contentVersion } from "./fit";

/** A bad argument to a tuning function, naming the field and the rule it broke. */
export class TuningInputError extends InputError {}

/** The decision at one candidate cutoff, with weighted counts (sums of 1/π). */
export interface OperatingPoint {
  /** Flag when d² > this. Lies between the lowest flagged and the highest unflagged labelled d². */
  mahalanobisSq: number;
  /** Lowest labelled d² that is flagged here (the PR-curve threshold), or null when nothing is. */
  lowestFlagged: number | null;
  /** Labelled rows flagged (unweighted count). */
  flaggedRows: number;
  truePositives: number;
  falsePositives: number;
  falseNegatives: number;
  trueNegatives: number;
  /** TP / (TP + FP); null when nothing is flagged. */
  precision: number | null;
  /** TP / (TP + FN). */
  recall: number;
  /** 2·TP / (2·TP + FP + FN); 0 when TP = 0. */
  f1: number;
  /** (TP + FP) / total weight: the expected share of payments flagged. */
  flagRate: number;
}

/**
 * The PR curve in scikit-learn's layout (`precision_recall_curve`): `thresholds` ascending
 * (distinct d² values, flag when d² ≥ threshold), `precision[i]` / `recall[i]` at `thresholds[i]`,
 * and one last point (precision 1, recall 0) without a threshold.
 */
export interface PrCurve {
  precision: number[];
  recall: number[];
  thresholds: number[];
}

/** Every candidate operating point of a labelled set, its PR curve and the curve's area. */
export interface OperatingTable {
  /**
   * Candidate points from the strictest to the loosest: `points[0]` flags nothing (cutoff = the
   * largest labelled d²); `points[k]` flags the rows whose d² is among the k largest distinct
   * values. (When the smallest labelled d² is exactly 0, "flag all" cannot be written as
   * d² > cutoff with cutoff ≥ 0, and that last point is left out.)
   */
  points: OperatingPoint[];
  curve: PrCurve;
  /**
   * Average precision AP = Σₖ (Rₖ − Rₖ₋₁)·Pₖ over the thresholds from high to low (R₀ = 0): the
   * step-wise area under the PR curve, as scikit-learn's `average_precision_score` (no
   * interpolation). This is the PR-AUC isodense reports.
   */
  averagePrecision: number;
  /**
   * Area under the PR curve by the trapezoidal rule over the curve's points (scikit-learn's
   * `auc(recall, precision)`). Linear interpolation in PR space is optimistic (Davis & Goadrich
   * 2006, "The relationship between precision-recall and ROC curves", ICML), so it is reported
   * beside AP, never instead of it.
   */
  trapezoidArea: number;
  /** Labelled rows. */
  rows: number;
  /** Σ weights of all rows (estimates the payments the labels stand for). */
  totalWeight: number;
  /** Σ weights of fraud rows. */
  fraudWeight: number;
  /** Σ weights of legitimate rows. */
  legitimateWeight: number;
  /** Distinct labelled d² values, descending (`points[k]` flags the first k of them). */
  distinctScores: Float64Array;
}

/**
 * Builds the operating table of a labelled set.
 * @param scores d² of each labelled payment (finite, ≥ 0)
 * @param labels true / 1 = fraud, false / 0 = legitimate, one per score
 * @param weights optional 1/π per row (finite, > 0); default 1
 * @throws TuningInputError naming the field: lengths differ, no rows, a bad score, label or
 *   weight, or no row labelled fraud (recall is undefined without fraud)
 * @example
 * const table = operatingPoints([0.1, 0.4, 0.35, 0.8], [false, false, true, true]);
 * table.averagePrecision // 0.8333… (scikit-learn's documented example)
 */
export function operatingPoints(scores: ArrayLike<number>, labels: ArrayLike<boolean | number>, weights?: ArrayLike<number>): OperatingTable {
  const m = scores.length;
  if (m === 0) throw new TuningInputError("scores", "must hold at least one labelled payment. Actual: none");
  if (labels.length !== m) throw new TuningInputError("labels", `must have one label per score (${m}). Actual: ${labels.length}`);
  if (weights !== undefined && weights.length !== m) {
    throw new TuningInputError("weights", `must have one weight per score (${m}). Actual: ${weights.length}`);
  }
  const fraud = new Uint8Array(m);
  const w = new Float64Array(m);
  let totalWeight = 0;
  let fraudWeight = 0;
  for (let i = 0; i < m; i++) {
    const s = scores[i];
    if (typeof s !== "number" || !(s >= 0) || s === Infinity) {
      throw new TuningInputError(`scores[${i}]`, `must be a finite squared distance ≥ 0. Actual: ${String(s)}`);
    }
    const label = labels[i];
    if (label === true || label === 1) fraud[i] = 1;
    else if (!(label === false || label === 0)) {
      throw new TuningInputError(`labels[${i}]`, `must be true/1 (fraud) or false/0 (legitimate). Actual: ${String(label)}`);
    }
    const wi = weights === undefined ? 1 : weights[i];
    if (typeof wi !== "number" || !(wi > 0) || wi === Infinity) {
      throw new TuningInputError(`weights[${i}]`, `must be a finite number > 0 (1 / inclusion probability). Actual: ${String(wi)}`);
    }
    w[i] = wi;
    totalWeight += wi;
    if (fraud[i] === 1) fraudWeight += wi;
  }
  if (fraudWeight === 0) {
    throw new TuningInputError("labels", `must include at least one payment labelled fraud (recall is undefined without fraud). Actual: 0 of ${m}`);
  }
  const legitimateWeight = totalWeight - fraudWeight;

  // One sort of the row indices by d², descending; ties are one threshold.
  const order = new Uint32Array(m);
  for (let i = 0; i < m; i++) order[i] = i;
  const s = Float64Array.from({ length: m }, (_, i) => scores[i]);
  order.sort((a, b) => s[b] - s[a]);

  const distinct: number[] = [];
  const tpAt: number[] = [];
  const fpAt: number[] = [];
  const rowsAt: number[] = [];
  let tp = 0;
  let fp = 0;
  let k = 0;
  while (k < m) {
    const value = s[order[k]];
    while (k < m && s[order[k]] === value) {
      const i = order[k];
      if (fraud[i] === 1) tp += w[i];
      else fp += w[i];
      k++;
    }
    distinct.push(value);
    tpAt.push(tp);
    fpAt.push(fp);
    rowsAt.push(k);
  }

  const points: OperatingPoint[] = [pointFrom(distinct[0], null, 0, 0, 0, fraudWeight, legitimateWeight, totalWeight)];
  for (let j = 0; j < distinct.length; j++) {
    const cut = cutoffBelow(distinct, j);
    if (cut === null) break; // the smallest d² is 0: "flag all" is not expressible as d² > cutoff ≥ 0
    points.push(pointFrom(cut, distinct[j], rowsAt[j], tpAt[j], fpAt[j], fraudWeight, legitimateWeight, totalWeight));
  }

  // PR curve in scikit-learn's order (thresholds ascending), AP and trapezoid from high to low.
  const curve: PrCurve = { precision: [], recall: [], thresholds: [] };
  let ap = 0;
  let trapezoid = 0;
  let previousRecall = 0;
  let previousPrecision = 1;
  for (let j = 0; j < distinct.length; j++) {
    const precision = tpAt[j] / (tpAt[j] + fpAt[j]);
    const recall = tpAt[j] / fraudWeight;
    ap += (recall - previousRecall) * precision;
    trapezoid += ((recall - previousRecall) * (precision + previousPrecision)) / 2;
    previousRecall = recall;
    previousPrecision = precision;
  }
  for (let j = distinct.length - 1; j >= 0; j--) {
    curve.thresholds.push(distinct[j]);
    curve.precision.push(tpAt[j] / (tpAt[j] + fpAt[j]));
    curve.recall.push(tpAt[j] / fraudWeight);
  }
  curve.precision.push(1);
  curve.recall.push(0);

  return {
    points,
    curve,
    averagePrecision: ap,
    trapezoidArea: trapezoid,
    rows: m,
    totalWeight,
    fraudWeight,
    legitimateWeight,
    distinctScores: Float64Array.from(distinct),
  };
}

/**
 * A cutoff c with distinct[j + 1] ≤ c < distinct[j] (so d² > c flags exactly the j + 1 largest
 * distinct values): the midpoint, which keeps a later re-score that differs in the last bits on
 * the same side. Null when j is the last value and it is 0.
 */
function cutoffBelow(distinct: readonly number[], j: number): number | null {
  const upper = distinct[j];
  const lower = j + 1 < distinct.length ? distinct[j + 1] : 0;
  if (j + 1 >= distinct.length && upper === 0) return null;
  const mid = lower + (upper - lower) / 2;
  // Adjacent doubles: the midpoint can round onto `upper`, which would unflag it.
  return mid < upper ? mid : lower;
}

function pointFrom(
  cutoff: number,
  lowestFlagged: number | null,
  flaggedRows: number,
  tp: number,
  fp: number,
  fraudWeight: number,
  legitimateWeight: number,
  totalWeight: number,
): OperatingPoint {
  const fn = Math.max(0, fraudWeight - tp);
  const tn = Math.max(0, legitimateWeight - fp);
  return {
    mahalanobisSq: cutoff,
    lowestFlagged,
    flaggedRows,
    truePositives: tp,
    falsePositives: fp,
    falseNegatives: fn,
    trueNegatives: tn,
    precision: tp + fp > 0 ? tp / (tp + fp) : null,
    recall: tp / fraudWeight,
    f1: tp > 0 ? (2 * tp) / (2 * tp + fp + fn) : 0,
    flagRate: (tp + fp) / totalWeight,
  };
}

/**
 * The operating point of an arbitrary cutoff (e.g. the live model's, or a slider's): the counts
 * of the rows with d² > `cutoffMahalanobisSq`. O(log m).
 * @throws TuningInputError when the cutoff is not a finite number ≥ 0
 * @example pointAtCutoff(table, artifact.cutoff.mahalanobisSq).recall
 */
export function pointAtCutoff(table: OperatingTable, cutoffMahalanobisSq: number): OperatingPoint {
  if (typeof cutoffMahalanobisSq !== "number" || !(cutoffMahalanobisSq >= 0) || cutoffMahalanobisSq === Infinity) {
    throw new TuningInputError("cutoffMahalanobisSq", `must be a finite number ≥ 0. Actual: ${String(cutoffMahalanobisSq)}`);
  }
  // Number of distinct scores strictly above the cutoff (descending array: binary search).
  const d = table.distinctScores;
  let lo = 0;
  let hi = d.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (d[mid] > cutoffMahalanobisSq) lo = mid + 1;
    else hi = mid;
  }
  return { ...table.points[lo], mahalanobisSq: cutoffMahalanobisSq };
}

/**
 * The loosest operating point whose flag rate does not exceed `flagRate` (the most recall a model
 * gets while flagging at most that share of payments). Compares models at equal review effort.
 * @throws TuningInputError when the rate is not in [0, 1]
 * @example pointAtFlagRate(table, 0.01).recall // recall when flagging at most 1 % of payments
 */
export function pointAtFlagRate(table: OperatingTable, flagRate: number): OperatingPoint {
  if (typeof flagRate !== "number" || !(flagRate >= 0 && flagRate <= 1)) {
    throw new TuningInputError("flagRate", `must be a share between 0 and 1. Actual: ${String(flagRate)}`);
  }
  let best = table.points[0];
  for (const p of table.points) {
    if (p.flagRate <= flagRate) best = p;
    else break; // flag rates grow along the table
  }
  return best;
}

// ---------------------------------------------------------------------------------------------
// Objectives
// ---------------------------------------------------------------------------------------------

/** What the cutoff should achieve. */
export type TuningObjective =
  | { kind: "f1" }
  | {
      kind: "capacity";
      /** Reviews the analysts can do per day (all analysts together). */
      reviewsPerDay: number;
      /** Payments scored per day. */
      paymentsPerDay: number;
    }
  | {
      kind: "cost";
      /** Cost of reviewing one flag (analyst time), in the shop's currency. */
      reviewCost: number;
      /** Average loss from one fraud that is not flagged. */
      missedFraudCost: number;
      /** Cost of flagging one good customer (delay, annoyance), on top of the review cost. */
      frictionCost: number;
      /** Payments per day; when given, costs are also reported per day. */
      paymentsPerDay?: number;
    };

/** Expected cost of an operating point, per payment and (when payments per day are known) per day. */
export interface ExpectedCost {
  perPayment: number;
  perDay: number | null;
}

/** A cutoff written the three ways an artifact carries it. */
export interface CutoffForms {
  /** Flag when d² > this. */
  mahalanobisSq: number;
  /** P(χ²ₙ > cutoff): flag when a payment's tail probability is below this. */
  tailProbability: number;
  /** Per segment: −½ (n ln 2π + ln|Σ_s| + cutoff); flag when the log-density is below it. */
  logDensity: Record<string, number>;
}

/** What the cutoff forms need from a model: its number of columns and each segment's ln|Σ|. */
export interface CutoffModel {
  n: number;
  logDet: Readonly<Record<string, number>>;
}

/** The cutoff an objective chose, with the figures at that point. */
export interface TunedCutoff {
  objective: TuningObjective["kind"];
  /** Index of the chosen point in `table.points`. */
  index: number;
  point: OperatingPoint;
  cutoff: CutoffForms;
  /** Flag rate × payments per day, when payments per day are known. */
  expectedDailyFlags: number | null;
  /** For the cost objective. */
  expectedCost: ExpectedCost | null;
}

/**
 * The {@link CutoffModel} of an artifact.
 * @example cutoffModelOf(artifact) // { n: 10, logDet: { "*": -3.1, web: -3.4, … } }
 */
export function cutoffModelOf(artifact: Pick<ModelArtifact, "columns" | "segments">): CutoffModel {
  const logDet: Record<string, number> = {};
  for (const key of Object.keys(artifact.segments)) logDet[key] = artifact.segments[key].logDet;
  return { n: artifact.columns.length, logDet };
}

/**
 * A cutoff on d² as tail probability P(χ²ₙ > d²) and as per-segment log-density
 * −½ (n ln 2π + ln|Σ_s| + d²), the forms `parseArtifact` checks for agreement.
 * @throws TuningInputError when the cutoff is not a finite number ≥ 0 or n is not a positive integer
 * @example cutoffForms({ n: 2, logDet: { "*": 0 } }, 5.991).tailProbability // ≈ 0.05
 */
export function cutoffForms(model: CutoffModel, cutoffMahalanobisSq: number): CutoffForms {
  if (typeof cutoffMahalanobisSq !== "number" || !(cutoffMahalanobisSq >= 0) || cutoffMahalanobisSq === Infinity) {
    throw new TuningInputError("cutoffMahalanobisSq", `must be a finite number ≥ 0. Actual: ${String(cutoffMahalanobisSq)}`);
  }
  if (!Number.isInteger(model.n) || model.n < 1) {
    throw new TuningInputError("n", `must be a positive integer (the number of model columns). Actual: ${String(model.n)}`);
  }
  const logDensity: Record<string, number> = {};
  for (const key of Object.keys(model.logDet)) {
    logDensity[key] = logDensityAt(model.n, model.logDet[key], cutoffMahalanobisSq);
  }
  return { mahalanobisSq: cutoffMahalanobisSq, tailProbability: chiSquareSurvival(cutoffMahalanobisSq, model.n), logDensity };
}

/**
 * Expected cost at an operating point: missedFraudCost·FN + reviewCost·(TP + FP) + frictionCost·FP,
 * divided by the total weight (per payment) and times payments per day (per day).
 * @throws TuningInputError naming a cost that is not a finite number ≥ 0
 * @example expectedCost(point, { kind: "cost", reviewCost: 4, missedFraudCost: 120, frictionCost: 2 }, table.totalWeight)
 */
export function expectedCost(point: OperatingPoint, costs: Extract<TuningObjective, { kind: "cost" }>, totalWeight: number): ExpectedCost {
  checkCosts(costs);
  if (!(totalWeight > 0) || totalWeight === Infinity) {
    throw new TuningInputError("totalWeight", `must be a finite number > 0. Actual: ${String(totalWeight)}`);
  }
  const total = costs.missedFraudCost * point.falseNegatives + costs.reviewCost * (point.truePositives + point.falsePositives) + costs.frictionCost * point.falsePositives;
  const perPayment = total / totalWeight;
  return { perPayment, perDay: costs.paymentsPerDay === undefined ? null : perPayment * costs.paymentsPerDay };
}

function checkCosts(costs: Extract<TuningObjective, { kind: "cost" }>): void {
  for (const field of ["reviewCost", "missedFraudCost", "frictionCost"] as const) {
    const v = costs[field];
    if (typeof v !== "number" || !(v >= 0) || v === Infinity) {
      throw new TuningInputError(field, `must be a finite amount ≥ 0. Actual: ${String(v)}`);
    }
  }
  if (costs.paymentsPerDay !== undefined) checkPositive("paymentsPerDay", costs.paymentsPerDay);
}

function checkPositive(field: string, value: number): void {
  if (typeof value !== "number" || !(value > 0) || value === Infinity) {
    throw new TuningInputError(field, `must be a finite number > 0. Actual: ${String(value)}`);
  }
}

/**
 * Picks a cutoff from the operating table by an objective. Ties go to the stricter cutoff (fewer
 * flags for the same figure).
 * - `f1`: the point with the highest F1.
 * - `capacity`: among points whose expected daily flags (flag rate × paymentsPerDay) are at most
 *   reviewsPerDay, the one with the highest recall. "Flag nothing" always fits, so there is
 *   always an answer.
 * - `cost`: the point with the least expected cost (see {@link expectedCost}).
 * @throws TuningInputError naming a bad objective field (unknown kind, negative capacity, …)
 * @example tuneCutoff(table, cutoffModelOf(artifact), { kind: "capacity", reviewsPerDay: 400, paymentsPerDay: 30000 })
 */
export function tuneCutoff(table: OperatingTable, model: CutoffModel, objective: TuningObjective): TunedCutoff {
  const points = table.points;
  let index = 0;
  let dailyPayments: number | null = null;
  let cost: ExpectedCost | null = null;
  switch (objective?.kind) {
    case "f1": {
      for (let k = 1; k < points.length; k++) if (points[k].f1 > points[index].f1) index = k;
      break;
    }
    case "capacity": {
      const { reviewsPerDay, paymentsPerDay } = objective;
      if (typeof reviewsPerDay !== "number" || !(reviewsPerDay >= 0) || reviewsPerDay === Infinity) {
        throw new TuningInputError("reviewsPerDay", `must be a finite number ≥ 0. Actual: ${String(reviewsPerDay)}`);
      }
      checkPositive("paymentsPerDay", paymentsPerDay);
      dailyPayments = paymentsPerDay;
      for (let k = 1; k < points.length; k++) {
        // Flag rates only grow along the table: the first point over capacity ends the search.
        if (points[k].flagRate * paymentsPerDay > reviewsPerDay) break;
        if (points[k].recall > points[index].recall) index = k;
      }
      break;
    }
    case "cost": {
      checkCosts(objective);
      dailyPayments = objective.paymentsPerDay ?? null;
      let best = expectedCost(points[0], objective, table.totalWeight);
      for (let k = 1; k < points.length; k++) {
        const c = expectedCost(points[k], objective, table.totalWeight);
        if (c.perPayment < best.perPayment) {
          best = c;
          index = k;
        }
      }
      cost = best;
      break;
    }
    default:
      throw new TuningInputError("objective.kind", `must be f1, capacity or cost. Actual: ${String((objective as { kind?: unknown })?.kind)}`);
  }
  const point = points[index];
  return {
    objective: objective.kind,
    index,
    point,
    cutoff: cutoffForms(model, point.mahalanobisSq),
    expectedDailyFlags: dailyPayments === null ? null : point.flagRate * dailyPayments,
    expectedCost: cost,
  };
}

// ---------------------------------------------------------------------------------------------
// A new artifact version with another cutoff
// ---------------------------------------------------------------------------------------------

/** How a cutoff was chosen, as the artifact records it. */
export type CutoffBasis = ModelArtifact["cutoff"]["basis"];

const BASES: readonly CutoffBasis[] = ["flag-rate", "f1", "capacity", "cost", "manual"];

/** Options of {@link retuneArtifact}. */
export interface RetuneOptions {
  /** ISO-8601 time stamp of the new version; default now. */
  createdAt?: string;
  /** Model id; default derived from the content as the fit derives it (`contentVersion`). */
  version?: string;
}

/**
 * A new artifact version with the same features, segments and parameters and a new cutoff: the
 * cutoff's tail probability and per-segment log-densities are recomputed, the version id is
 * derived from the new content exactly as the fit derives it (so a different cutoff gives a
 * different id), and the result is sealed and verified with `parseArtifact`.
 * @param artifact the model to retune (sealed or not; its checksum is replaced)
 * @param cutoffMahalanobisSq the new cutoff on d² (finite, ≥ 0)
 * @param basis how it was chosen
 * @param flagRate the expected share of payments flagged at the new cutoff, or null when unknown
 *   (required for basis `flag-rate`)
 * @throws TuningInputError naming a bad cutoff, basis, flag rate or time stamp
 * @example const tuned = await retuneArtifact(live, 31.4, "f1", 0.0082); // tuned.version !== live.version
 */
export async function retuneArtifact(
  artifact: UnsealedArtifact | ModelArtifact,
  cutoffMahalanobisSq: number,
  basis: CutoffBasis,
  flagRate: number | null,
  options: RetuneOptions = {},
): Promise<ModelArtifact> {
  if (!BASES.includes(basis)) {
    throw new TuningInputError("basis", `must be one of ${BASES.join(", ")}. Actual: ${String(basis)}`);
  }
  if (flagRate !== null && (typeof flagRate !== "number" || !(flagRate >= 0 && flagRate <= 1))) {
    throw new TuningInputError("flagRate", `must be a share between 0 and 1, or null. Actual: ${String(flagRate)}`);
  }
  if (basis === "flag-rate" && flagRate === null) {
    throw new TuningInputError("flagRate", 'is required when basis is "flag-rate"');
  }
  const createdAt = options.createdAt ?? new Date().toISOString();
  if (!/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d+)?(Z|[+-]\d{2}:\d{2})$/.test(createdAt) || Number.isNaN(Date.parse(createdAt))) {
    throw new TuningInputError("createdAt", `must be an ISO-8601 date-time such as 2026-12-01T09:30:00Z. Actual: ${createdAt}`);
  }
  const forms = cutoffForms(cutoffModelOf(artifact), cutoffMahalanobisSq);
  const { checksum: _checksum, version: _version, ...rest } = artifact as ModelArtifact;
  const content: Omit<UnsealedArtifact, "version"> = {
    ...rest,
    createdAt,
    cutoff: {
      mahalanobisSq: forms.mahalanobisSq,
      tailProbability: forms.tailProbability,
      logDensity: forms.logDensity,
      basis,
      flagRate,
    },
  };
  const version = options.version ?? (await contentVersion(content, createdAt));
  const sealed = await sealArtifact({ ...content, version });
  // Verified like every artifact a scorer may load; an ArtifactError here names the field.
  return parseArtifact(sealed);
}
