/**
 * What one pass over the rows keeps for a fit finished by `fitFromMoments`: the moments of the
 * model columns per segment and pooled, added in fixed blocks of {@link BLOCK_ROWS} rows (so the
 * numbers do not depend on how a reader chunks its rows: DuckDB and the CSV reader give the same
 * model to the last bit), each feature's observed range, the fraud count, and a seeded reservoir
 * of raw rows with their segments (the streaming fit's sample, Algorithm R).
 */
import { modelColumns, transformInto } from "../../shared-model/src/features";
import type { Label } from "../ledger";
import { FIT_SAMPLE_ROWS, type FitRow } from "../../shared-model/src/fit";
import type { MomentsResult } from "../../shared-model/src/fit-from-moments";
import { countSegment } from "../../shared-model/src/fit-read-pass";
import { MomentAccumulator } from "../../shared-model/src/moments";
import { createRandom } from "../../shared-model/src/random";
import { Reservoir } from "../../shared-model/src/reservoir";
import { POOLED_SEGMENT } from "../../shared-model/src/sql-moments";
import type { FittedFeature } from "../../shared-model/src/types";

/** Rows per block update of the moments: large enough for fast dot products, small in memory. */
export const BLOCK_ROWS = 2048;

/** A model's moments with its pending block of transformed rows, column by column. */
class BlockedMoments {
  readonly moments: MomentAccumulator;
  private readonly columns: Float64Array[];
  private filled = 0;
  constructor(
    private readonly n: number,
    private readonly scratch: Float64Array,
  ) {
    this.moments = new MomentAccumulator(n);
    this.columns = Array.from({ length: n }, () => new Float64Array(BLOCK_ROWS));
  }
  add(x: Float64Array): void {
    for (let c = 0; c < this.n; c++) this.columns[c][this.filled] = x[c];
    if (++this.filled === BLOCK_ROWS) this.flush();
  }
  flush(): void {
    this.moments.pushColumns(this.columns, this.filled, this.scratch);
    this.filled = 0;
  }
  /** Adds rows `from` to `to` (exclusive) of a block held column by column, already transformed. */
  addColumns(columns: readonly Float64Array[], from: number, to: number): void {
    let r = from;
    while (r < to) {
      const take = Math.min(BLOCK_ROWS - this.filled, to - r);
      for (let c = 0; c < this.n; c++) this.columns[c].set(columns[c].subarray(r, r + take), this.filled);
      this.filled += take;
      r += take;
      if (this.filled === BLOCK_ROWS) this.flush();
    }
  }
}

/** Accumulates rows in the order they come; `finish()` hands over what `fitFromMoments` needs. */
export class RowAccumulator {
  private readonly k: number;
  private readonly n: number;
  private readonly pooled: BlockedMoments;
  private readonly segments = new Map<string, BlockedMoments>();
  private readonly segmentCounts = new Map<string, number>();
  private readonly reservoir: Reservoir;
  private readonly sampleSegments: (string | null)[] = [];
  private readonly observedMin: number[];
  private readonly observedMax: number[];
  private readonly x: Float64Array;
  private readonly scratch = new Float64Array(BLOCK_ROWS * 64);
  /** Every feature is used as it is: model columns are the raw columns. */
  private readonly untransformed: boolean;
  /** Rows used and rows left out as fraud so far. */
  rowsUsed = 0;
  fraudRows = 0;

  constructor(
    private readonly features: readonly FittedFeature[],
    private readonly segmentBy: string | null,
    seed: number,
  ) {
    this.k = features.length;
    this.n = modelColumns(features).length;
    this.pooled = this.blocked();
    this.reservoir = new Reservoir(this.k, FIT_SAMPLE_ROWS, createRandom(seed));
    this.observedMin = new Array<number>(this.k).fill(Infinity);
    this.observedMax = new Array<number>(this.k).fill(-Infinity);
    this.x = new Float64Array(this.n);
    this.untransformed = features.every((f) => f.transform === "none");
  }

  private blocked(): BlockedMoments {
    return new BlockedMoments(this.n, this.scratch.length >= BLOCK_ROWS * this.n ? this.scratch : new Float64Array(BLOCK_ROWS * this.n));
  }

  /**
   * Adds one row (raw values already checked against their transforms).
   * @param rowNumber 1-based row of the source, for the segment errors
   * @throws FitInputError for the reserved segment `*` or too many segment values
   */
  add(raw: Float64Array, segment: string | null, rowNumber: number): void {
    this.rowsUsed++;
    const k = this.k;
    for (let j = 0; j < k; j++) {
      const v = raw[j];
      if (v < this.observedMin[j]) this.observedMin[j] = v;
      if (v > this.observedMax[j]) this.observedMax[j] = v;
    }
    const key = this.segmentBy === null || segment === "" ? null : segment;
    const slot = this.reservoir.offer(raw);
    if (slot >= 0) this.sampleSegments[slot] = key;
    transformInto(this.features, raw, this.x);
    this.pooled.add(this.x);
    if (key !== null) {
      countSegment(this.segmentCounts, key, this.segmentBy, rowNumber);
      let own = this.segments.get(key);
      if (own === undefined) {
        own = this.blocked();
        this.segments.set(key, own);
      }
      own.add(this.x);
    }
  }

  /**
   * Adds a block of rows given column by column (`values[j][r]`, raw values already checked),
   * counting and leaving out rows labelled fraud. Without segments or transforms the columns are
   * copied into the pending block as they are: the same numbers as row by row, without
   * assembling each row three times.
   * @param firstRow 1-based row of the source of the block's first row, for the segment errors
   */
  addBlock(values: readonly Float64Array[], size: number, labels: readonly Label[], segments: readonly (string | null)[], firstRow: number): void {
    if (this.untransformed && this.segmentBy === null && !labels.includes("fraud")) {
      const k = this.k;
      for (let j = 0; j < k; j++) {
        const column = values[j];
        let min = this.observedMin[j];
        let max = this.observedMax[j];
        for (let r = 0; r < size; r++) {
          const v = column[r];
          if (v < min) min = v;
          if (v > max) max = v;
        }
        this.observedMin[j] = min;
        this.observedMax[j] = max;
      }
      for (let r = 0; r < size; r++) {
        const slot = this.reservoir.offerColumns(values, r);
        if (slot >= 0) this.sampleSegments[slot] = null;
      }
      this.pooled.addColumns(values, 0, size);
      this.rowsUsed += size;
      return;
    }
    const raw = new Float64Array(this.k);
    for (let r = 0; r < size; r++) {
      if (labels[r] === "fraud") {
        this.fraudRows++;
        continue;
      }
      for (let j = 0; j < raw.length; j++) raw[j] = values[j][r];
      this.add(raw, segments[r], firstRow + r);
    }
  }

  /** Flushes the pending blocks and returns the moments and the sample (its rows are views of the reservoir: no copy). */
  finish(): { result: MomentsResult; sample: FitRow[] } {
    const moments = new Map<string, MomentAccumulator>();
    this.pooled.flush();
    moments.set(POOLED_SEGMENT, this.pooled.moments);
    for (const [key, blocked] of this.segments) {
      blocked.flush();
      moments.set(key, blocked.moments);
    }
    const k = this.k;
    const rows = this.reservoir.rows();
    const sample: FitRow[] = Array.from({ length: this.reservoir.size }, (_, r) => ({ values: rows.subarray(r * k, r * k + k), segment: this.sampleSegments[r] }));
    const lambdas = this.features.map((f) => f.lambda);
    return { result: { moments, observedMin: this.observedMin, observedMax: this.observedMax, lambdas, fraudRows: this.fraudRows }, sample };
  }
}
