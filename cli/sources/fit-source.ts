/**
 * `isodense fit` on a CSV, Parquet or DuckDB source, read through DuckDB: one streaming pass
 * validates every row, accumulates the moments per segment block by block (memory flat in rows)
 * and keeps a seeded sample of rows; `fitFromMoments` finishes. When a transform has a parameter
 * to fit (Yeo–Johnson λ), DuckDB draws the sample first (`USING SAMPLE reservoir … REPEATABLE`),
 * so the only full read that reaches JavaScript is still one.
 */
import type { ModelArtifact } from "../../shared-model/src/artifact";
import { transformInto, modelColumns } from "../../shared-model/src/features";
import { DEFAULT_FIT_SEED, FIT_SAMPLE_ROWS, type FitOptions, type FitReport, type FitRow } from "../../shared-model/src/fit";
import { fitFromMoments, type MomentsResult } from "../../shared-model/src/fit-from-moments";
import { countSegment } from "../../shared-model/src/fit-read-pass";
import { fitTransforms, needsFittedParameters } from "../../shared-model/src/fit-transforms";
import { MomentAccumulator } from "../../shared-model/src/moments";
import { createRandom } from "../../shared-model/src/random";
import { Reservoir } from "../../shared-model/src/reservoir";
import { POOLED_SEGMENT } from "../../shared-model/src/sql-moments";
import type { FittedFeature } from "../../shared-model/src/types";
import type { LedgerRequest } from "../ledger";
import { DuckEngine } from "./duckdb-engine";
import { openSource, readBlocks, type OpenedSource } from "./duckdb-rows";
import type { DataSource } from "./source";

/**
 * Fits a model to the rows of `source` not labelled fraud.
 * @throws CsvError / InputError naming a bad value; FitRefusal, FitInputError as `fitModel` does
 * @example await fitSource(resolveSource("ledger.parquet", {}), { features }, options)
 */
export async function fitSource(
  source: DataSource,
  request: LedgerRequest,
  options: FitOptions,
): Promise<{ artifact: ModelArtifact; report: FitReport }> {
  const engine = await DuckEngine.open();
  try {
    const opened = await openSource(engine, source, request);
    const seed = options.seed ?? DEFAULT_FIT_SEED;
    const presampled = needsFittedParameters(options.features) ? await sampleInSql(engine, source, opened, request, seed) : null;
    const features = presampled === null ? fittedWithoutData(options) : lambdasFrom(options, presampled);
    const progress = options.onProgress ?? (() => {});
    const { result, sample } = await momentsPass(engine, source, opened, request, features, seed, options.segmentBy, progress);
    return await fitFromMoments(result, { rows: presampled ?? sample }, { ...options, source: options.source ?? source.label }, "read through DuckDB");
  } finally {
    engine.close();
  }
}

/** Features whose transforms have no parameter: as declared. */
function fittedWithoutData(options: FitOptions): FittedFeature[] {
  return fitTransforms(options.features, new Float64Array(0), 0, [], []).features;
}

/** Features with λ fitted on the sampled rows. */
function lambdasFrom(options: FitOptions, sample: FitRow[]): FittedFeature[] {
  const k = options.features.length;
  const raw = new Float64Array(sample.length * k);
  sample.forEach((row, r) => raw.set(row.values, r * k));
  return fitTransforms(options.features, raw, sample.length, [], []).features;
}

/** A seeded uniform sample of the rows not labelled fraud, drawn by DuckDB. */
async function sampleInSql(engine: DuckEngine, source: DataSource, opened: OpenedSource, request: LedgerRequest, seed: number): Promise<FitRow[]> {
  const query =
    `SELECT * FROM ${opened.selection} AS ledger ` +
    `WHERE label_text IS NULL OR lower(trim(label_text)) NOT IN ('fraud', '1') ` +
    `USING SAMPLE reservoir(${FIT_SAMPLE_ROWS} ROWS) REPEATABLE (${seed})`;
  const rows: FitRow[] = [];
  for await (const block of readBlocks(engine, source, opened, request, query)) {
    for (let r = 0; r < block.size; r++) rows.push({ values: Float64Array.from(block.values, (column) => column[r]), segment: block.segments[r] });
  }
  return rows;
}

/**
 * The one full pass: validate, count, moments per segment (block-wise, merged exactly), observed
 * ranges, and a seeded reservoir of rows with their segments.
 */
async function momentsPass(
  engine: DuckEngine,
  source: DataSource,
  opened: OpenedSource,
  request: LedgerRequest,
  features: FittedFeature[],
  seed: number,
  segmentBy: string | null,
  progress: (pass: string, rows: number) => void,
): Promise<{ result: MomentsResult; sample: FitRow[] }> {
  const k = features.length;
  const n = modelColumns(features).length;
  const reservoir = new Reservoir(k, FIT_SAMPLE_ROWS, createRandom(seed));
  const sampleSegments: (string | null)[] = [];
  const moments = new Map<string, MomentAccumulator>([[POOLED_SEGMENT, new MomentAccumulator(n)]]);
  const segmentCounts = new Map<string, number>();
  const observedMin = new Array<number>(k).fill(Infinity);
  const observedMax = new Array<number>(k).fill(-Infinity);
  let fraudRows = 0;
  let rowsUsed = 0;
  const raw = new Float64Array(k);
  const x = new Float64Array(n);
  let columns: Float64Array[] = [];
  let scratch = new Float64Array(0);
  for await (const block of readBlocks(engine, source, opened, request)) {
    if (columns.length === 0 || columns[0].length < block.size) {
      columns = Array.from({ length: n }, () => new Float64Array(block.size));
      scratch = new Float64Array(block.size * n);
    }
    // Rows of the block grouped by segment (index lists), so each group is one block update.
    const groups = new Map<string, number[]>();
    let used = 0;
    for (let r = 0; r < block.size; r++) {
      if (block.labels[r] === "fraud") {
        fraudRows++;
        continue;
      }
      rowsUsed++;
      for (let j = 0; j < k; j++) {
        const v = block.values[j][r];
        raw[j] = v;
        if (v < observedMin[j]) observedMin[j] = v;
        if (v > observedMax[j]) observedMax[j] = v;
      }
      const segment = segmentBy === null ? null : block.segments[r];
      if (segment !== null) {
        countSegment(segmentCounts, segment, segmentBy, block.firstRow + r);
        let group = groups.get(segment);
        if (group === undefined) groups.set(segment, (group = []));
        group.push(used);
      }
      const slot = reservoir.offer(raw);
      if (slot >= 0) sampleSegments[slot] = segment;
      transformInto(features, raw, x);
      for (let c = 0; c < n; c++) columns[c][used] = x[c];
      used++;
    }
    moments.get(POOLED_SEGMENT)!.pushColumns(columns, used, scratch);
    for (const [segment, rows] of groups) {
      let accumulator = moments.get(segment);
      if (accumulator === undefined) moments.set(segment, (accumulator = new MomentAccumulator(n)));
      const picked = Array.from({ length: n }, (_, c) => Float64Array.from(rows, (i) => columns[c][i]));
      accumulator.pushColumns(picked, rows.length);
    }
    progress("read", rowsUsed + fraudRows);
  }
  const sampleRows = reservoir.rows();
  const sample: FitRow[] = Array.from({ length: reservoir.size }, (_, r) => ({
    values: sampleRows.slice(r * k, r * k + k),
    segment: sampleSegments[r],
  }));
  const lambdas = features.map((f) => f.lambda);
  return { result: { moments, observedMin, observedMax, lambdas, fraudRows }, sample };
}
