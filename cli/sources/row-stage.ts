/**
 * A fit's rows staged once, so a fit whose transforms have parameters to fit (Yeo–Johnson λ)
 * reads, validates or derives its source once instead of twice. The first pass writes the raw
 * feature values of every validated row to a temporary file, block by block and column by column
 * (doubles as they are: the second pass sees the same bits), with each row's fraud flag and
 * segment, while a seeded reservoir draws the sample that λ is fitted on. The second pass reads
 * the file back in the same blocks. Memory is one block and the sample; the file (8 bytes per
 * value, 256 MB for 1M × 32) lives in a private temporary folder that {@link RowStage.remove}
 * deletes, on success or failure alike, and that an interrupting signal removes too (temp-folders.ts).
 */
import { closeSync, openSync, readSync, writeSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { DEFAULT_FIT_SEED, FIT_SAMPLE_ROWS, type FitRow, type RowSource } from "../../shared-model/src/fit";
import { countSegment } from "../../shared-model/src/fit-read-pass";
import { createRandom } from "../../shared-model/src/random";
import { Reservoir } from "../../shared-model/src/reservoir";
import { InputError } from "../errors";
import type { Label } from "../ledger";
import { makeTempFolder, removeTempFolder } from "../temp-folders";
import { BLOCK_ROWS } from "./row-accumulator";

/** One staged block, as `RowAccumulator.addBlock` takes it. */
export interface StagedBlock {
  size: number;
  /** Raw value of feature j in row r: `values[j][r]`; reused by the next block. */
  values: Float64Array[];
  /** `fraud` or `null` (a row's other labels do not matter to the fit). */
  labels: Label[];
  segments: (string | null)[];
  /** 1-based number of the block's first row, as the first pass numbered it. */
  firstRow: number;
}

/** Segment id of a row without a segment (none, empty, or left out as fraud). */
const NO_SEGMENT = -1;

/**
 * Rows of a first pass, written to a temporary file and read back in the same blocks.
 * @example
 * const stage = RowStage.open(k, "channel", seed);
 * try { for (…) stage.addBlock(…); for (const block of stage.blocks()) … } finally { stage.remove(); }
 */
export class RowStage {
  private readonly folder: string;
  private readonly file: string;
  private fd: number;
  private readonly reservoir: Reservoir;
  private readonly sampleSegments: (string | null)[] = [];
  private readonly segmentIds = new Map<string, number>();
  private readonly segmentNames: string[] = [];
  private readonly segmentCounts = new Map<string, number>();
  /** Rows buffered by {@link add} until a block is full. */
  private readonly pending: Float64Array[];
  private readonly pendingSegments: (string | null)[] = [];
  private pendingFirstRow = 1;
  private removed = false;
  /** Rows used (not labelled fraud) so far. */
  rowsUsed = 0;

  private constructor(
    private readonly k: number,
    private readonly segmentBy: string | null,
    seed: number,
    tempRoot: string,
  ) {
    this.folder = makeTempFolder("isodense-stage-", tempRoot);
    this.file = join(this.folder, "rows.f64");
    this.fd = openSync(this.file, "w+");
    this.reservoir = new Reservoir(k, FIT_SAMPLE_ROWS, createRandom(seed));
    this.pending = Array.from({ length: k }, () => new Float64Array(BLOCK_ROWS));
  }

  /**
   * Creates the temporary folder and file.
   * @param k raw feature values per row
   * @param seed the fit's seed: the sample is the one the fit's own reservoir draws from the same rows
   * @param tempRoot where the private folder goes (the system's temporary folder by default)
   */
  static open(k: number, segmentBy: string | null, seed: number, tempRoot = tmpdir()): RowStage {
    return new RowStage(k, segmentBy, seed, tempRoot);
  }

  /**
   * Stages a validated block (`values[j][r]`), sampling its rows not labelled fraud.
   * @param firstRow 1-based row of the source of the block's first row, for the segment errors
   * @throws FitInputError for the reserved segment `*` or too many segment values, as the fit would
   */
  addBlock(values: readonly Float64Array[], size: number, labels: readonly Label[], segments: readonly (string | null)[], firstRow: number): void {
    const flags = new Uint8Array(size);
    const ids = new Int32Array(size).fill(NO_SEGMENT);
    for (let r = 0; r < size; r++) {
      if (labels[r] === "fraud") {
        flags[r] = 1;
        continue;
      }
      this.rowsUsed++;
      const key = this.segmentBy === null || segments[r] === "" ? null : segments[r];
      if (key !== null) ids[r] = this.segmentId(key, firstRow + r);
      const slot = this.reservoir.offerColumns(values, r);
      if (slot >= 0) this.sampleSegments[slot] = key;
    }
    const header = new Float64Array([size, firstRow]);
    this.write(header);
    for (let j = 0; j < this.k; j++) this.write(values[j].subarray(0, size));
    this.write(flags);
    this.write(ids);
  }

  /**
   * Stages one row of a source that yields only rows used (numbered 1, 2, … in order).
   * @throws FitInputError for the reserved segment `*` or too many segment values
   */
  add(values: ArrayLike<number>, segment: string | null): void {
    const r = this.pendingSegments.length;
    for (let j = 0; j < this.k; j++) this.pending[j][r] = values[j];
    this.pendingSegments.push(segment);
    if (r + 1 === BLOCK_ROWS) this.flushPending();
  }

  private flushPending(): void {
    const size = this.pendingSegments.length;
    if (size === 0) return;
    this.addBlock(this.pending, size, new Array<Label>(size).fill(null), this.pendingSegments, this.pendingFirstRow);
    this.pendingFirstRow += size;
    this.pendingSegments.length = 0;
  }

  /** The segment's id in the file; counts the segment as the fit does, so its errors come from this pass. */
  private segmentId(key: string, rowNumber: number): number {
    countSegment(this.segmentCounts, key, this.segmentBy, rowNumber);
    let id = this.segmentIds.get(key);
    if (id === undefined) {
      id = this.segmentNames.length;
      this.segmentIds.set(key, id);
      this.segmentNames.push(key);
    }
    return id;
  }

  private write(array: ArrayBufferView): void {
    const bytes = new Uint8Array(array.buffer, array.byteOffset, array.byteLength);
    let done = 0;
    try {
      while (done < bytes.length) done += writeSync(this.fd, bytes, done, bytes.length - done);
    } catch (error) {
      // A full disk is the likely cause: say where the copy went and how to move it.
      throw new InputError(
        "TMPDIR",
        "room for the staged rows",
        `the fit stages its rows (8 bytes a value) in ${this.folder} and could not write there: ${(error as Error).message}; set TMPDIR to a folder with room`,
      );
    }
  }

  /** The sampled rows used, with their segments (views of the reservoir: no copy). Call after the first pass. */
  sample(): FitRow[] {
    this.flushPending();
    const k = this.k;
    const rows = this.reservoir.rows();
    return Array.from({ length: this.reservoir.size }, (_, r) => ({ values: rows.subarray(r * k, r * k + k), segment: this.sampleSegments[r] }));
  }

  /** Reads the staged blocks back in order (each block's arrays are reused by the next). */
  *blocks(): Generator<StagedBlock, void, undefined> {
    this.flushPending();
    const k = this.k;
    const header = new Float64Array(2);
    const values = Array.from({ length: k }, () => new Float64Array(BLOCK_ROWS));
    let position = 0;
    const read = (array: ArrayBufferView): boolean => {
      const bytes = new Uint8Array(array.buffer, array.byteOffset, array.byteLength);
      let done = 0;
      while (done < bytes.length) {
        const got = readSync(this.fd, bytes, done, bytes.length - done, position);
        if (got === 0) return false;
        done += got;
        position += got;
      }
      return true;
    };
    while (read(header)) {
      const size = header[0];
      // DuckDB's chunks hold at most 2,048 rows, as do the blocks of add(): one buffer fits every block.
      if (size > BLOCK_ROWS) throw new Error(`staged block of ${size} rows exceeds ${BLOCK_ROWS}`);
      for (let j = 0; j < k; j++) read(values[j].subarray(0, size));
      const flags = new Uint8Array(size);
      const ids = new Int32Array(size);
      read(flags);
      read(ids);
      const labels = Array.from(flags, (flag): Label => (flag === 1 ? "fraud" : null));
      const segments = Array.from(ids, (id) => (id === NO_SEGMENT ? null : this.segmentNames[id]));
      yield { size, values, labels, segments, firstRow: header[1] };
    }
  }

  /** Closes and deletes the temporary file and its folder; safe to call twice. */
  remove(): void {
    if (this.removed) return;
    this.removed = true;
    closeSync(this.fd);
    removeTempFolder(this.folder);
  }
}

/**
 * A row source read once for a fit that passes over its rows several times (`fitModel`: read,
 * moments, fourth moments, cutoff): the first complete pass reads `inner` and stages its rows, the
 * later passes read the staged copy, so a ledger is parsed and its records derived once. `inner`'s
 * own counts are those of that one pass. Call {@link remove} when the fit is done, however it ends.
 * @example
 * const rows = new StagedRowSource(source, features.length, "channel");
 * try { await fitModel(rows, options); } finally { rows.remove(); }
 */
export class StagedRowSource implements RowSource {
  private stage: RowStage | null = null;
  private complete = false;

  constructor(
    private readonly inner: RowSource,
    private readonly k: number,
    private readonly segmentBy: string | null,
    private readonly tempRoot?: string,
  ) {}

  async *pass(): AsyncGenerator<FitRow, void, undefined> {
    if (this.complete && this.stage !== null) {
      // One buffer for every row: the fit copies what it keeps.
      const values = new Float64Array(this.k);
      for (const block of this.stage.blocks()) {
        for (let r = 0; r < block.size; r++) {
          for (let j = 0; j < this.k; j++) values[j] = block.values[j][r];
          yield { values, segment: block.segments[r] };
        }
      }
      return;
    }
    this.stage?.remove();
    this.stage = RowStage.open(this.k, this.segmentBy, DEFAULT_FIT_SEED, this.tempRoot);
    for await (const row of this.inner.pass()) {
      this.stage.add(row.values, row.segment);
      // The segment as the staged copy gives it back, so every pass reads the same rows.
      yield { values: row.values, segment: this.segmentBy === null || row.segment === "" ? null : row.segment };
    }
    this.complete = true;
  }

  /** Deletes the staged copy; safe to call twice. */
  remove(): void {
    this.stage?.remove();
  }
}
