/**
 * What the model page's cutoff control shows as it moves, computed in the browser from the
 * labelled operating table (no round trip per move): the operating point of the labelled set, the
 * Horvitz–Thompson estimates for all traffic with intervals, and the expected flags per day.
 */
import type { OperatingData } from "@contract";
import { estimateRates, type RateEstimates } from "../../../shared-model/src/estimates";
import { operatingPoints, pointAtCutoff, TuningInputError, type OperatingPoint, type OperatingTable } from "../../../shared-model/src/tuning";

/** Labelled rows as the insights API sends them (parallel arrays). */
export type LabelArrays = Pick<OperatingData["labels"], "mahalanobisSq" | "fraud" | "weight">;

/** The figures at one cutoff. */
export interface CutoffView {
  cutoff: number;
  point: OperatingPoint;
  estimates: RateEstimates;
  /** Expected share flagged × scored per day; null without counted traffic. */
  expectedFlagsPerDay: number | null;
}

/**
 * The labelled set's operating table, or a sentence saying why there is none (no labels, or no
 * label is fraud, so recall is undefined).
 *
 * @example
 * buildTable({ mahalanobisSq: [3, 40], fraud: [0, 1], weight: [1, 1] }) // OperatingTable
 */
export function buildTable(labels: LabelArrays): OperatingTable | string {
  if (labels.mahalanobisSq.length === 0) return "No decisions from a fully decided day for this version yet.";
  try {
    return operatingPoints(labels.mahalanobisSq, labels.fraud, labels.weight);
  } catch (error) {
    if (error instanceof TuningInputError) return error.field === "labels" ? "No decision is fraud yet, so recall cannot be estimated." : `${error.field}: ${error.rule}`;
    throw error;
  }
}

/**
 * Figures at `cutoff` (flag when d² > cutoff). O(log m) for the point, O(m) for the estimates.
 *
 * @example
 * cutoffView(table, labels, 24.5, 9120).expectedFlagsPerDay // 38.3
 */
export function cutoffView(table: OperatingTable, labels: LabelArrays, cutoff: number, scoredPerDay: number | null): CutoffView {
  const point = pointAtCutoff(table, cutoff);
  const flagged = labels.mahalanobisSq.map((d) => (d > cutoff ? 1 : 0));
  const estimates = estimateRates({ fraud: labels.fraud, flagged, weights: labels.weight });
  return { cutoff, point, estimates, expectedFlagsPerDay: scoredPerDay === null ? null : point.flagRate * scoredPerDay };
}

/**
 * The slider's range: 0 to a bit beyond both the largest labelled d² and the live cutoff.
 *
 * @example sliderMax([3, 40], 20) // 44
 */
export function sliderMax(scores: readonly number[], liveCutoff: number): number {
  let top = liveCutoff;
  for (const s of scores) if (s > top) top = s;
  return Math.ceil(top * 1.1);
}
