/**
 * Pass 1 of the fit: validate every raw value, count rows per segment, note each feature's
 * observed range, and keep a seeded reservoir sample of raw rows for the Yeo–Johnson λ fits and
 * the drift reference edges.
 */
import { MAX_SEGMENTS } from "./artifact";
import { checkRow } from "./fit-checks";
import { segmentKey } from "./fit-slots";
import { FIT_SAMPLE_ROWS, FitInputError, PROGRESS_EVERY, type RowSource } from "./fit-types";
import { createRandom } from "./random";
import { Reservoir } from "./reservoir";
import type { FeatureDeclaration } from "./types";

/** What the first pass learnt about the rows. */
export interface ReadSummary {
  rowsUsed: number;
  /** Rows per non-empty segment value. */
  segmentCounts: Map<string, number>;
  /** Raw rows (feature order), up to {@link FIT_SAMPLE_ROWS}. */
  sample: Reservoir;
  /** Smallest and largest raw value per feature. */
  observedMin: Float64Array;
  observedMax: Float64Array;
}

/**
 * Counts segment values as they come, refusing the reserved `*` and more values than an artifact
 * may hold.
 * @throws FitInputError naming the row
 */
export function countSegment(counts: Map<string, number>, key: string, segmentBy: string | null, rowNumber: number): void {
  if (key === "*") throw new FitInputError("segment", `'*' is reserved for the pooled model and cannot be a ${segmentBy} value`, rowNumber);
  const before = counts.get(key);
  if (before === undefined && counts.size >= MAX_SEGMENTS - 1) {
    throw new FitInputError("segmentBy", `'${segmentBy}' has more than ${MAX_SEGMENTS - 1} distinct values; segment by a categorical column with few values`, rowNumber);
  }
  counts.set(key, (before ?? 0) + 1);
}

/**
 * Runs pass 1 over `source`.
 * @param seed seed of the sample (the fit's seed)
 * @throws FitInputError for a bad row or segment value
 */
export async function readPass(
  source: RowSource,
  decls: readonly FeatureDeclaration[],
  segmentBy: string | null,
  seed: number,
  progress: (pass: string, rows: number) => void,
): Promise<ReadSummary> {
  const k = decls.length;
  const sample = new Reservoir(k, FIT_SAMPLE_ROWS, createRandom(seed));
  const segmentCounts = new Map<string, number>();
  const observedMin = new Float64Array(k).fill(Infinity);
  const observedMax = new Float64Array(k).fill(-Infinity);
  let rowsUsed = 0;
  for await (const row of source.pass()) {
    rowsUsed++;
    checkRow(row, decls, rowsUsed);
    for (let j = 0; j < k; j++) {
      const v = row.values[j];
      if (v < observedMin[j]) observedMin[j] = v;
      if (v > observedMax[j]) observedMax[j] = v;
    }
    const key = segmentKey(row, segmentBy);
    if (key !== null) countSegment(segmentCounts, key, segmentBy, rowsUsed);
    sample.offer(row.values);
    if (rowsUsed % PROGRESS_EVERY === 0) progress("read", rowsUsed);
  }
  progress("read", rowsUsed);
  return { rowsUsed, segmentCounts, sample, observedMin, observedMax };
}
