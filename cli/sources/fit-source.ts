/**
 * `isodense fit` on a CSV, Parquet or DuckDB source, read through DuckDB: one streaming pass
 * validates every row and feeds a {@link RowAccumulator} (moments per segment in fixed blocks,
 * memory flat in rows, and a seeded sample of rows); `fitFromMoments` finishes. When a transform
 * has a parameter to fit (Yeo–Johnson λ), the moments need λ first, so they take a second pass
 * over the rows: the source is read and validated (or derived) once into a temporary staged copy
 * ({@link RowStage}), λ is fitted on that pass's sample, and the moments read the staged copy. A
 * CSV ledger of payment records goes through the record deriver instead, into the same stage and
 * accumulator, so each account's derivation runs once.
 */
import type { ModelArtifact } from "../../shared-model/src/artifact";
import { fitFeatures } from "../../shared-model/src/features";
import { DEFAULT_FIT_SEED, FIT_SAMPLE_ROWS, type FitOptions, type FitReport, type FitRow, type RowSource } from "../../shared-model/src/fit";
import { PROGRESS_EVERY } from "../../shared-model/src/fit-types";
import { fitFromMoments, type MomentsResult } from "../../shared-model/src/fit-from-moments";
import { needsFittedParameters } from "../../shared-model/src/fit-transforms";
import { createRandom } from "../../shared-model/src/random";
import { Reservoir } from "../../shared-model/src/reservoir";
import type { FeatureDeclaration, FittedFeature } from "../../shared-model/src/types";
import { CsvError } from "../csv";
import type { LedgerRequest } from "../ledger";
import { DuckEngine } from "./duckdb-engine";
import { type OpenedSource, openSource, readBlocks } from "./duckdb-rows";
import { RowAccumulator } from "./row-accumulator";
import { RowStage } from "./row-stage";
import type { DataSource } from "./source";

/**
 * How a fit with a parameter to fit makes its second pass: over the staged copy (`staged`, the
 * default), or by reading the source again (`reread`: DuckDB draws the sample in SQL first, a
 * row source is read twice), the earlier way, kept so the benchmark and the tests can compare the two.
 */
export interface FitPasses {
  mode: "staged" | "reread";
  /** Folder for the stage's private temporary folder (the system's temporary folder by default). */
  tempRoot?: string;
}

const STAGED: FitPasses = { mode: "staged" };

/** What the passes hand to `fitFromMoments`. */
interface Accumulated {
  result: MomentsResult;
  sample: FitRow[];
}

/**
 * Fits a model to the rows of `source` not labelled fraud.
 * @throws CsvError / InputError naming a bad value; FitRefusal, FitInputError as `fitModel` does
 * @example await fitSource(resolveSource("ledger.parquet", {}), { features }, options)
 */
export async function fitSource(
  source: DataSource,
  request: LedgerRequest,
  options: FitOptions,
  passes: FitPasses = STAGED,
): Promise<{ artifact: ModelArtifact; report: FitReport }> {
  const engine = await DuckEngine.open();
  let closed = false;
  // DuckDB's buffers go before the estimation (or the staged pass) allocates its own.
  const closeEngine = (): void => {
    if (!closed) engine.close();
    closed = true;
  };
  try {
    const opened = await openSource(engine, source, request);
    const seed = options.seed ?? DEFAULT_FIT_SEED;
    const progress = options.onProgress ?? (() => {});
    let accumulated: Accumulated;
    if (needsFittedParameters(options.features) && passes.mode === "staged") {
      accumulated = await stagedPasses(options, seed, passes, async (stage) => {
        let rowsRead = 0;
        for await (const block of readBlocks(engine, source, opened, request)) {
          stage.addBlock(block.values, block.size, block.labels, block.segments, block.firstRow);
          rowsRead += block.size;
          progress("read", rowsRead);
        }
        closeEngine();
      });
    } else {
      const presampled = needsFittedParameters(options.features) ? await sampleInSql(engine, source, opened, request, seed) : null;
      const rows = new RowAccumulator(featuresFromSample(options.features, presampled ?? []), options.segmentBy, seed);
      for await (const block of readBlocks(engine, source, opened, request)) {
        rows.addBlock(block.values, block.size, block.labels, block.segments, block.firstRow);
        progress("read", rows.rowsUsed + rows.fraudRows);
      }
      const { result, sample } = rows.finish();
      accumulated = { result, sample: presampled ?? sample };
    }
    closeEngine();
    return await fitFromMoments(accumulated.result, { rows: accumulated.sample }, { ...options, source: options.source ?? source.label }, "read through DuckDB");
  } finally {
    closeEngine();
  }
}

/**
 * Fits a model to a re-readable row source (a ledger of payment records, derived on the way, or a
 * SQLite ledger)
 * through the same accumulator as {@link fitSource}, so both give the same model for the same rows.
 * With a Yeo–Johnson feature the rows are staged on the one read (`passes.mode` `reread` reads the
 * source a second time instead).
 * @param counts read after the last pass: rows read and rows left out as fraud
 */
export async function fitRowSource(
  rows: RowSource,
  counts: () => { rowsRead: number; rowsExcludedAsFraud: number },
  options: FitOptions,
  origin = "derived from records",
  passes: FitPasses = STAGED,
): Promise<{ artifact: ModelArtifact; report: FitReport }> {
  const seed = options.seed ?? DEFAULT_FIT_SEED;
  let accumulated: Accumulated;
  if (needsFittedParameters(options.features) && passes.mode === "staged") {
    const progress = options.onProgress ?? (() => {});
    accumulated = await stagedPasses(options, seed, passes, async (stage) => {
      let rowsUsed = 0;
      for await (const row of rows.pass()) {
        stage.add(row.values, row.segment);
        if (++rowsUsed % PROGRESS_EVERY === 0) progress("read", rowsUsed);
      }
    });
  } else {
    let presampled: FitRow[] | null = null;
    if (needsFittedParameters(options.features)) {
      const reservoir = new Reservoir(options.features.length, FIT_SAMPLE_ROWS, createRandom(seed));
      const segments: (string | null)[] = [];
      for await (const row of rows.pass()) {
        const slot = reservoir.offer(row.values);
        if (slot >= 0) segments[slot] = row.segment;
      }
      const k = options.features.length;
      const held = reservoir.rows();
      presampled = Array.from({ length: reservoir.size }, (_, r) => ({ values: held.slice(r * k, r * k + k), segment: segments[r] }));
    }
    const accumulator = new RowAccumulator(featuresFromSample(options.features, presampled ?? []), options.segmentBy, seed);
    let rowNumber = 0;
    for await (const row of rows.pass()) accumulator.add(row.values, row.segment, ++rowNumber);
    const { result, sample } = accumulator.finish();
    accumulated = { result, sample: presampled ?? sample };
  }
  const { rowsRead, rowsExcludedAsFraud } = counts();
  accumulated.result.fraudRows = rowsExcludedAsFraud;
  return fitFromMoments(accumulated.result, { rows: accumulated.sample }, { ...options, rowsRead, rowsExcludedAsFraud }, origin);
}

/**
 * The two passes of a fit with a parameter to fit, with the source read once: `readOnce` stages
 * every validated row, λ is fitted on the stage's sample, and the moments read the staged copy.
 * The staged copy is removed whether the passes succeed or fail.
 */
async function stagedPasses(options: FitOptions, seed: number, passes: FitPasses, readOnce: (stage: RowStage) => Promise<void>): Promise<Accumulated> {
  const progress = options.onProgress ?? (() => {});
  const stage = RowStage.open(options.features.length, options.segmentBy, seed, passes.tempRoot);
  try {
    await readOnce(stage);
    // The same seed and rows: the accumulator's own sample is the stage's, row for row.
    const rows = new RowAccumulator(featuresFromSample(options.features, stage.sample()), options.segmentBy, seed);
    for (const block of stage.blocks()) {
      rows.addBlock(block.values, block.size, block.labels, block.segments, block.firstRow);
      progress("moments", rows.rowsUsed + rows.fraudRows);
    }
    return rows.finish();
  } finally {
    stage.remove();
  }
}

/**
 * The features with their parameters fitted on the sampled rows. Each column is sorted first, so
 * λ does not depend on the order in which an engine returned the sample.
 */
function featuresFromSample(decls: readonly FeatureDeclaration[], sample: readonly FitRow[]): FittedFeature[] {
  return fitFeatures(decls, (j) => Float64Array.from(sample, (row) => row.values[j]).sort());
}

/** A seeded uniform sample of the rows not labelled fraud, drawn by DuckDB. */
async function sampleInSql(engine: DuckEngine, source: DataSource, opened: OpenedSource, request: LedgerRequest, seed: number): Promise<FitRow[]> {
  const query =
    `SELECT * FROM ${opened.selection} AS ledger ` +
    `WHERE label_text IS NULL OR lower(trim(label_text)) NOT IN ('fraud', '1') ` +
    `USING SAMPLE reservoir(${FIT_SAMPLE_ROWS} ROWS) REPEATABLE (${seed})`;
  const rows: FitRow[] = [];
  try {
    for await (const block of readBlocks(engine, source, opened, request, query)) {
      for (let r = 0; r < block.size; r++) rows.push({ values: Float64Array.from(block.values, (column) => column[r]), segment: block.segments[r] });
    }
  } catch (error) {
    // Rows of the sample are numbered in the sample: read the source in order to name the first bad row of the source itself.
    if (error instanceof CsvError) for await (const block of readBlocks(engine, source, opened, request)) void block;
    throw error;
  }
  return rows;
}
