/**
 * The labelled operating table of a version: its decided review items (d², outcome, weight
 * 1/inclusion probability), the traffic they stand for, and — at a requested cutoff — the
 * operating point and the Horvitz–Thompson estimates of precision, recall and prevalence with
 * intervals. The review app recomputes the same figures in the browser as its cutoff moves.
 */
import { EstimateInputError, estimateRates, operatingPoints, pointAtCutoff, TuningInputError } from "../../../shared-model/src";
import type { LabelledRows } from "./traffic-queries";
import type { CutoffFigures } from "../contract";
export type { CutoffFigures };

/**
 * Figures of `rows` at `cutoff`, or a sentence saying why they cannot be computed (no labels, or no
 * label is fraud: recall is undefined).
 *
 * @example
 * figuresAtCutoff(rows, 24.5, 9120) // { point: { precision: 0.41, … }, estimates: { recall: { value: 0.63, … } }, expectedFlagsPerDay: 38.2 }
 */
export function figuresAtCutoff(rows: LabelledRows, cutoff: number, scoredPerDay: number | null): CutoffFigures | string {
  if (rows.mahalanobisSq.length === 0) return "no decided review items for this version yet";
  try {
    const table = operatingPoints(rows.mahalanobisSq, rows.fraud, rows.weight);
    const point = pointAtCutoff(table, cutoff);
    const estimates = estimateRates({ fraud: rows.fraud, flagged: rows.mahalanobisSq.map((d) => (d > cutoff ? 1 : 0)), weights: rows.weight });
    return { cutoffMahalanobisSq: cutoff, point, estimates, expectedFlagsPerDay: scoredPerDay === null ? null : point.flagRate * scoredPerDay };
  } catch (error) {
    if (error instanceof TuningInputError || error instanceof EstimateInputError) return `${error.field}: ${error.rule}`;
    throw error;
  }
}
