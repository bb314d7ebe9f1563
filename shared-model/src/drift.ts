/**
 * Drift: is recent traffic still distributed like the traffic the model was fitted on?
 *
 * Population stability index over buckets, PSI = Σᵢ (aᵢ − eᵢ)·ln(aᵢ / eᵢ), with eᵢ the expected
 * (training) share and aᵢ the actual (recent) share of bucket i. It is the symmetrised
 * Kullback–Leibler divergence KL(a‖e) + KL(e‖a) (Jeffreys 1946) of the two bucket distributions.
 * The usual alert levels are 0.1 and 0.25 (common practice in credit scoring; Siddiqi 2006,
 * "Credit Risk Scorecards", Wiley): below 0.1 "stable", from 0.1 "watch", from 0.25 "shifted".
 *
 * Buckets come from the artifact: `reference.columnEdges[j]` (one list per model column, in model
 * units after the transforms) and `reference.scoreEdges` (for d²) are the nine inner decile cut
 * points of the training sample, so each of the ten buckets expects 10 % of the traffic. A bucket
 * is right-closed: bucket k holds values v with e₍ₖ₋₁₎ < v ≤ eₖ (bucket 0: v ≤ e₀; the last:
 * v > e_last). Right-closed keeps a point mass at the low end (a count that is mostly 0, where
 * several deciles coincide) in one bucket with the merged expected share of the coinciding
 * deciles; see {@link referencePsi}.
 *
 * Pure functions over counts, so the worker can accumulate counts per day in D1 and the review app
 * can show the table.
 */
import { InputError } from "./input-error";
import { wilsonInterval } from "./intervals";
import { quantiles } from "./reservoir";

/**
 * Smallest share used inside the logarithm. An empty bucket would make ln(a/e) infinite; flooring
 * both shares at 1e-4 (one payment in 10,000) caps one empty bucket's term at
 * (e − 1e-4)·ln(e / 1e-4) ≈ 0.92 for e = 0.1: clearly "shifted", but finite and comparable.
 */
export const PSI_FLOOR = 1e-4;
/** PSI from which a distribution is worth watching (common practice; Siddiqi 2006). */
export const PSI_WATCH = 0.1;
/** PSI from which a distribution has shifted (common practice; Siddiqi 2006). */
export const PSI_SHIFTED = 0.25;

/** Our words for the three alert levels. */
export type DriftLevel = "stable" | "watch" | "shifted";

/** A bad argument, naming the field and the rule it broke. */
export class DriftInputError extends InputError {}

/**
 * The bucket of a value: the number of edges strictly below it (0 … edges.length), i.e. bucket k
 * holds e₍ₖ₋₁₎ < v ≤ eₖ. Binary search, O(log edges).
 * @param edges inner cut points, non-decreasing
 * @throws DriftInputError when the value is NaN
 * @example bucketIndex([1, 2, 3], 2) // 1 (2 is in (1, 2])
 * @example bucketIndex([1, 2, 3], 3.5) // 3
 */
export function bucketIndex(edges: ArrayLike<number>, value: number): number {
  if (typeof value !== "number" || Number.isNaN(value)) {
    throw new DriftInputError("value", `must be a number. Actual: ${String(value)}`);
  }
  let lo = 0;
  let hi = edges.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (edges[mid] < value) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/**
 * Population stability index of actual counts against expected shares, both floored at
 * {@link PSI_FLOOR}.
 * @param expectedShares training share per bucket (finite, ≥ 0, summing to 1 within 1e-6)
 * @param actualCounts recent count per bucket (finite, ≥ 0, not all zero)
 * @throws DriftInputError on different lengths, fewer than two buckets, a negative or non-finite
 *   entry, shares not summing to 1, or no counts at all
 * @example psi([0.5, 0.5], [60, 40]) // (0.6 − 0.5)·ln(1.2) + (0.4 − 0.5)·ln(0.8) ≈ 0.0405
 */
export function psi(expectedShares: ArrayLike<number>, actualCounts: ArrayLike<number>): number {
  const b = expectedShares.length;
  if (b < 2) throw new DriftInputError("expectedShares", `must have at least two buckets. Actual: ${b}`);
  if (actualCounts.length !== b) {
    throw new DriftInputError("actualCounts", `must have one count per bucket (${b}). Actual: ${actualCounts.length}`);
  }
  let shareSum = 0;
  let total = 0;
  for (let i = 0; i < b; i++) {
    const e = expectedShares[i];
    if (typeof e !== "number" || !(e >= 0) || e === Infinity) {
      throw new DriftInputError(`expectedShares[${i}]`, `must be a finite share ≥ 0. Actual: ${String(e)}`);
    }
    const a = actualCounts[i];
    if (typeof a !== "number" || !(a >= 0) || a === Infinity) {
      throw new DriftInputError(`actualCounts[${i}]`, `must be a finite count ≥ 0. Actual: ${String(a)}`);
    }
    shareSum += e;
    total += a;
  }
  if (!(Math.abs(shareSum - 1) <= 1e-6)) {
    throw new DriftInputError("expectedShares", `must sum to 1. Actual: ${shareSum}`);
  }
  if (!(total > 0)) throw new DriftInputError("actualCounts", "must hold at least one payment. Actual: all zero");
  let index = 0;
  for (let i = 0; i < b; i++) {
    const e = Math.max(expectedShares[i], PSI_FLOOR);
    const a = Math.max(actualCounts[i] / total, PSI_FLOOR);
    index += (a - e) * Math.log(a / e);
  }
  return index;
}

/**
 * The alert level of a PSI: below {@link PSI_WATCH} "stable", below {@link PSI_SHIFTED} "watch",
 * else "shifted".
 * @throws DriftInputError when the PSI is not a finite number ≥ 0
 * @example driftLevel(0.12) // "watch"
 */
export function driftLevel(value: number): DriftLevel {
  if (typeof value !== "number" || !(value >= 0) || value === Infinity) {
    throw new DriftInputError("psi", `must be a finite number ≥ 0. Actual: ${String(value)}`);
  }
  if (value < PSI_WATCH) return "stable";
  if (value < PSI_SHIFTED) return "watch";
  return "shifted";
}

/**
 * PSI of counts bucketed by {@link bucketIndex} on reference edges against the training share of
 * each bucket. The shares counted at fit time (`reference.columnShares` / `scoreShares`) are the
 * right baseline: with ties (a count that is mostly 0) a decile bucket did not hold 10 % of the
 * training rows, and assuming it did scores a column as drifting on its own training data. Older
 * artifacts without stored shares fall back to 1/(edges + 1) per bucket. Runs of equal edges (a
 * point mass in the training data) make the buckets between them empty by construction; they are
 * merged with the bucket that receives the tied value, and their expected shares added, before the
 * PSI is taken.
 * @param edges inner cut points, non-decreasing (e.g. `artifact.reference.scoreEdges`)
 * @param counts one count per bucket (edges.length + 1)
 * @param expectedShares training share per bucket (edges.length + 1, summing to 1); default equal shares
 * @throws DriftInputError on a decreasing edge, a wrong number of counts, or the rules of {@link psi}
 * @example referencePsi(artifact.reference.scoreEdges, dayCounts) // 0.03
 */
export function referencePsi(edges: ArrayLike<number>, counts: ArrayLike<number>, expectedShares?: ArrayLike<number>): number {
  const e = edges.length;
  if (e < 1) throw new DriftInputError("edges", "must hold at least one cut point. Actual: none");
  for (let i = 0; i < e; i++) {
    if (typeof edges[i] !== "number" || !Number.isFinite(edges[i])) {
      throw new DriftInputError(`edges[${i}]`, `must be a finite number. Actual: ${String(edges[i])}`);
    }
    if (i > 0 && edges[i] < edges[i - 1]) {
      throw new DriftInputError(`edges[${i}]`, `must not be below edges[${i - 1}] (non-decreasing). Actual: ${edges[i]} < ${edges[i - 1]}`);
    }
  }
  if (counts.length !== e + 1) {
    throw new DriftInputError("counts", `must have one count per bucket (edges + 1 = ${e + 1}). Actual: ${counts.length}`);
  }
  if (expectedShares !== undefined && expectedShares.length !== e + 1) {
    throw new DriftInputError("expectedShares", `must have one share per bucket (edges + 1 = ${e + 1}). Actual: ${expectedShares.length}`);
  }
  const shareOf = (k: number): number => (expectedShares === undefined ? 1 / (e + 1) : expectedShares[k]);
  const shares: number[] = [];
  const merged: number[] = [];
  // Bucket k + 1 is empty whenever edge k + 1 equals edge k; fold it into the open group.
  for (let k = 0; k <= e; k++) {
    const emptyByConstruction = k >= 1 && k < e && edges[k] === edges[k - 1];
    if (emptyByConstruction) {
      shares[shares.length - 1] += shareOf(k);
      merged[merged.length - 1] += counts[k];
    } else {
      shares.push(shareOf(k));
      merged.push(counts[k]);
    }
  }
  if (shares.length < 2) {
    throw new DriftInputError("edges", "all cut points are equal; a constant column has no distribution to compare");
  }
  return psi(shares, merged);
}

/** Quantile levels of the nine inner decile cut points. */
export const DECILE_LEVELS: readonly number[] = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9];

/** Drift reference of one column: decile cut points and the training share of each bucket. */
export interface DecileReference {
  /** Nine inner cut points, non-decreasing. */
  edges: number[];
  /** Share of the given values in each of the ten buckets of {@link bucketIndex}; sums to 1. */
  shares: number[];
}

/**
 * The nine inner deciles of `values` ({@link quantiles}: Hyndman & Fan 1996 definition 7, the
 * default of R and NumPy) and the share of the values that falls in each of the ten right-closed
 * buckets they make. The shares are counted, not assumed: with ties they are not 10 % each.
 * @param values the training sample (at least one finite value); not modified
 * @throws DriftInputError when there is no value or one is not finite
 * @example decileReference(Float64Array.of(0, 0, 0, 0, 0, 0, 0, 1, 2, 3)).shares[0] // 0.7
 */
export function decileReference(values: Float64Array): DecileReference {
  const m = values.length;
  if (m === 0) throw new DriftInputError("values", "must hold at least one value. Actual: none");
  for (let i = 0; i < m; i++) {
    if (!Number.isFinite(values[i])) throw new DriftInputError(`values[${i}]`, `must be a finite number. Actual: ${values[i]}`);
  }
  const edges = quantiles(values, DECILE_LEVELS);
  const counts = new Array<number>(edges.length + 1).fill(0);
  for (let i = 0; i < m; i++) counts[bucketIndex(edges, values[i])]++;
  return { edges, shares: counts.map((c) => c / m) };
}

/** One row of a drift table. */
export interface DriftRow {
  /** Model column name, or `mahalanobisSq` for the score. */
  name: string;
  psi: number;
  level: DriftLevel;
}

/**
 * PSI and level for every model column and for d², from bucket counts accumulated against an
 * artifact's reference edges.
 * @param reference `artifact.reference`
 * @param columns model column names (`artifact.columns`), one per edge list
 * @param counts `columns[j]` holds the counts of column j, `score` those of d² (edges + 1 each)
 * @throws DriftInputError naming the column when its counts do not fit its edges
 * @example driftTable(artifact.reference, artifact.columns, { columns: perColumnCounts, score: scoreCounts })
 */
export function driftTable(
  reference: { columnEdges: readonly (readonly number[])[]; scoreEdges: readonly number[] },
  columns: readonly string[],
  counts: { columns: readonly ArrayLike<number>[]; score: ArrayLike<number> },
): DriftRow[] {
  if (reference.columnEdges.length !== columns.length) {
    throw new DriftInputError("reference.columnEdges", `must have one edge list per column (${columns.length}). Actual: ${reference.columnEdges.length}`);
  }
  if (counts.columns.length !== columns.length) {
    throw new DriftInputError("counts.columns", `must have one count list per column (${columns.length}). Actual: ${counts.columns.length}`);
  }
  const rows: DriftRow[] = [];
  const add = (name: string, edges: readonly number[], c: ArrayLike<number>): void => {
    let value: number;
    try {
      value = referencePsi(edges, c);
    } catch (error) {
      if (error instanceof DriftInputError) throw new DriftInputError(`${name}.${error.field}`, error.rule);
      throw error;
    }
    rows.push({ name, psi: value, level: driftLevel(value) });
  };
  columns.forEach((name, j) => add(name, reference.columnEdges[j], counts.columns[j]));
  add("mahalanobisSq", reference.scoreEdges, counts.score);
  return rows;
}

/** One row of a drift report; psi and level are null when they cannot be computed (`note` says why). */
export interface DriftEntry {
  /** Model column, or `mahalanobisSq` for the score. */
  name: string;
  psi: number | null;
  level: DriftLevel | null;
  /** Payments behind the figure. */
  payments: number;
  note: string | null;
}

/** The reference a drift report needs: `artifact.reference` (shares optional for older artifacts). */
export interface DriftReference {
  columnEdges: readonly (readonly number[])[];
  scoreEdges: readonly number[];
  columnShares?: readonly (readonly number[])[];
  scoreShares?: readonly number[];
}

/**
 * PSI and alert level per model column and for d² (named `mahalanobisSq`) from bucket counts:
 * the weekly report and `isodense drift` share it. Each bucket is compared with its training share
 * when the artifact stores one, else with equal shares. A column without counts, without edges or
 * whose edges are all equal gets a null PSI and a note instead of failing the whole report.
 * @param reference `artifact.reference`
 * @param columns `artifact.columns`
 * @param totals bucket counts per column and for the score (edges + 1 each)
 * @example driftEntriesFor(artifact.reference, artifact.columns, { columns, score }) // [{ name: "amount", psi: 0.003, … }, …]
 */
export function driftEntriesFor(
  reference: DriftReference,
  columns: readonly string[],
  totals: { columns: readonly (ArrayLike<number> | undefined)[]; score: ArrayLike<number> | undefined },
): DriftEntry[] {
  const rows: DriftEntry[] = [];
  const add = (name: string, cuts: readonly number[] | undefined, counts: ArrayLike<number> | undefined, shares: readonly number[] | undefined): void => {
    let payments = 0;
    for (let i = 0; i < (counts?.length ?? 0); i++) payments += counts![i];
    if (!cuts || !counts || cuts.length === 0) {
      rows.push({ name, psi: null, level: null, payments, note: "the artifact stores no reference edges for it" });
      return;
    }
    if (payments === 0) {
      rows.push({ name, psi: null, level: null, payments, note: "no payments counted in the window" });
      return;
    }
    try {
      const value = referencePsi(cuts, counts, shares);
      rows.push({ name, psi: value, level: driftLevel(value), payments, note: null });
    } catch (error) {
      if (!(error instanceof DriftInputError)) throw error;
      rows.push({ name, psi: null, level: null, payments, note: `${error.field}: ${error.rule}` });
    }
  };
  columns.forEach((name, j) => add(name, reference.columnEdges[j], totals.columns[j], reference.columnShares?.[j]));
  add("mahalanobisSq", reference.scoreEdges, totals.score, reference.scoreShares);
  return rows;
}

/** The day's flag rate against the expected one. */
export interface FlagRateCheck {
  flagged: number;
  scored: number;
  observedRate: number;
  expectedRate: number;
  /** Two-sided confidence of this interval (after any correction for several tests). */
  confidence: number;
  /** Wilson score interval of the true daily rate at `confidence`. */
  low: number;
  high: number;
  /** "above" / "below" when the expected rate lies outside the interval, else "as-expected". */
  verdict: "as-expected" | "above" | "below";
}

/**
 * Compares a day's flag rate with the expected rate (the artifact's `cutoff.flagRate`) through the
 * Wilson score interval (Wilson 1927, "Probable inference, the law of succession, and statistical
 * inference", JASA 22:209–212), which keeps its coverage for small rates where the Wald interval
 * fails (Brown, Cai & DasGupta 2001, Statistical Science 16:101–133):
 *   centre = (p̂ + z²/2n)/(1 + z²/n),  half-width = z·√(p̂(1−p̂)/n + z²/4n²)/(1 + z²/n).
 * @param flagged payments flagged that day (whole number ≥ 0)
 * @param scored payments scored that day (whole number ≥ 1, ≥ flagged)
 * @param expectedRate share expected to be flagged, in [0, 1]
 * @param confidence two-sided level in (0, 1); default 0.95
 * @throws DriftInputError naming the bad argument
 * @example flagRateCheck(81, 263, 0.25).verdict // "above" (interval 0.2553–0.3662)
 */
export function flagRateCheck(flagged: number, scored: number, expectedRate: number, confidence = 0.95): FlagRateCheck {
  if (!Number.isSafeInteger(scored) || scored < 1) {
    throw new DriftInputError("scored", `must be a whole number ≥ 1. Actual: ${String(scored)}`);
  }
  if (!Number.isSafeInteger(flagged) || flagged < 0 || flagged > scored) {
    throw new DriftInputError("flagged", `must be a whole number from 0 to scored (${scored}). Actual: ${String(flagged)}`);
  }
  if (typeof expectedRate !== "number" || !(expectedRate >= 0 && expectedRate <= 1)) {
    throw new DriftInputError("expectedRate", `must be a share between 0 and 1. Actual: ${String(expectedRate)}`);
  }
  if (typeof confidence !== "number" || !(confidence > 0 && confidence < 1)) {
    throw new DriftInputError("confidence", `must be strictly between 0 and 1. Actual: ${String(confidence)}`);
  }
  const { low, high } = wilsonInterval(flagged, scored, confidence);
  const p = flagged / scored;
  const verdict = expectedRate < low ? "above" : expectedRate > high ? "below" : "as-expected";
  return { flagged, scored, observedRate: p, expectedRate, confidence, low, high, verdict };
}

/**
 * The confidence each of `tests` intervals needs so that, together, they all cover with at least
 * `familyConfidence` (Bonferroni: each test gets the share (1 − familyConfidence)/tests of the
 * error). Seven daily checks at 95 % each raise a false alarm in about 1 − 0.95⁷ ≈ 30 % of quiet
 * weeks; at 1 − 0.05/7 ≈ 99.29 % each, in at most 5 % (Bonferroni's inequality; no independence
 * needed).
 * @param familyConfidence wanted chance that no interval misses, in (0, 1)
 * @param tests number of intervals judged together (whole number ≥ 1)
 * @throws DriftInputError naming the bad argument
 * @example bonferroniConfidence(0.95, 7) // 0.992857…
 */
export function bonferroniConfidence(familyConfidence: number, tests: number): number {
  if (typeof familyConfidence !== "number" || !(familyConfidence > 0 && familyConfidence < 1)) {
    throw new DriftInputError("familyConfidence", `must be strictly between 0 and 1. Actual: ${String(familyConfidence)}`);
  }
  if (!Number.isSafeInteger(tests) || tests < 1) throw new DriftInputError("tests", `must be a whole number ≥ 1. Actual: ${String(tests)}`);
  return 1 - (1 - familyConfidence) / tests;
}
