/**
 * Reading a source through DuckDB into validated column blocks: raw feature values as doubles,
 * labels, segments and ids as text. The same column rules as the CSV reader (`resolveLedgerLayout`:
 * missing columns, features reusing the id, label or segment column) and the same value rules
 * (`checkRawValue`, `parseLabel`). A CSV file is parsed by DuckDB; when it holds a bad cell, the
 * project's own CSV reader reads it again to name the file, line and column exactly as before.
 */
import { DuckDBDoubleVector, type DuckDBValue } from "@duckdb/node-api";
import { checkRawValue } from "../../shared-model/src/features";
import { quoteIdentifier } from "../../shared-model/src/sql-moments";
import { CsvError, openCsvTable } from "../csv";
import { InputError } from "../errors";
import { openLedger, parseLabel, resolveLedgerLayout, type Label, type LedgerLayout, type LedgerRequest } from "../ledger";
import type { DuckEngine } from "./duckdb-engine";
import { duckRelation } from "./duckdb-relation";
import type { DataSource } from "./source";

/** One block of validated rows, column by column. */
export interface RowBlock {
  /** Rows in the block. */
  size: number;
  /** Raw value of feature j in row r: `values[j][r]`; may be DuckDB's own memory, valid until the next block is read. */
  values: Float64Array[];
  labels: Label[];
  /** Segment text, `null` when absent or empty. */
  segments: (string | null)[];
  /** 1-based number of the block's first row in the source. */
  firstRow: number;
}

/** A source opened in DuckDB: its layout and the SQL relation that selects its columns. */
export interface OpenedSource {
  layout: LedgerLayout;
  /** A parenthesised SELECT of `v_0…v_{k−1}` (doubles), `label_text` and `seg` (ids are not read: a fit needs none). */
  selection: string;
}

/**
 * Makes the source readable in `engine`: attaches a database file read-only, or describes a file
 * reader; checks the requested columns against the source's own.
 * @throws CsvError naming a missing column (as the CSV reader does); InputError when DuckDB
 *   cannot open the file
 */
export async function openSource(engine: DuckEngine, source: DataSource, request: LedgerRequest): Promise<OpenedSource> {
  let csvColumns: { header: string[]; doubles: Set<string> } | undefined;
  if (source.kind === "csv") {
    // The header through the project's reader: the same errors for a missing or broken header.
    const table = await openCsvTable(source.path);
    await table.rows.return();
    csvColumns = { header: table.header, doubles: new Set(request.features.map((f) => f.name)) };
  }
  const { relation, header } = await duckRelation(engine, source, csvColumns);
  const layout = resolveLedgerLayout(header, source.label, request);
  const select = request.features.map((f, j) => `CAST(${quoteIdentifier(f.name)} AS DOUBLE) AS v_${j}`);
  select.push(layout.labelColumn === null ? "NULL::VARCHAR AS label_text" : `CAST(${quoteIdentifier(layout.labelColumn)} AS VARCHAR) AS label_text`);
  select.push(layout.segmentColumn === null ? "NULL::VARCHAR AS seg" : `CAST(${quoteIdentifier(layout.segmentColumn)} AS VARCHAR) AS seg`);
  return { layout, selection: `(SELECT ${select.join(", ")} FROM ${relation})` };
}

/**
 * Streams the validated rows of an opened source in blocks.
 * @param query a SELECT over `opened.selection` returning the same columns (default: all rows in order)
 * @throws CsvError naming the file, line (CSV) or row (other sources) and column of the first bad value
 */
export async function* readBlocks(
  engine: DuckEngine,
  source: DataSource,
  opened: OpenedSource,
  request: LedgerRequest,
  query = `SELECT * FROM ${opened.selection} AS ledger`,
): AsyncGenerator<RowBlock, void, undefined> {
  const k = request.features.length;
  let rowNumber = 0;
  try {
    for await (const chunk of engine.stream(query)) {
      const size = chunk.rowCount;
      const block: RowBlock = {
        size,
        values: new Array<Float64Array>(k),
        labels: new Array(size).fill(null),
        segments: new Array(size).fill(null),
        firstRow: rowNumber + 1,
      };
      let firstBad = size;
      for (let j = 0; j < k; j++) {
        const vector = chunk.getColumnVector(j);
        const feature = request.features[j];
        let out = doubleItems(vector, size);
        if (out === null) {
          out = new Float64Array(size);
          for (let r = 0; r < size; r++) out[r] = (vector.getItem(r) as number | null) ?? Number.NaN;
        }
        block.values[j] = out;
        // Only the first bad row matters: later columns are checked up to it.
        for (let r = 0; r < firstBad; r++) if (checkRawValue(feature, out[r]) !== null) firstBad = r;
      }
      if (firstBad < size) {
        for (let j = 0; j < k; j++) {
          const value = chunk.getColumnVector(j).getItem(firstBad) as number | null;
          const problem = value === null ? "the cell is empty; a number is required" : checkRawValue(request.features[j], value);
          if (problem !== null) await badValue(source, request, rowNumber + firstBad + 1, opened.layout.header[opened.layout.featureIndex[j]], problem);
        }
      }
      const labels = opened.layout.labelColumn === null ? null : chunk.getColumnValues(k);
      const segments = opened.layout.segmentColumn === null ? null : chunk.getColumnValues(k + 1);
      for (let r = 0; r < size; r++) {
        rowNumber++;
        if (labels !== null) {
          const labelText = text(labels[r]);
          const label = labelText === null ? null : parseLabel(labelText);
          if (label === undefined) {
            await badValue(source, request, rowNumber, opened.layout.labelColumn!, `'${labelText}' is not a label; expected fraud, legitimate, 1, 0 or an empty cell`);
          }
          block.labels[r] = label ?? null;
        }
        if (segments !== null) {
          const segment = text(segments[r]);
          block.segments[r] = segment === "" ? null : segment;
        }
      }
      yield block;
    }
  } catch (error) {
    if (error instanceof CsvError || error instanceof InputError) throw error;
    // DuckDB refused a cell (text in a number column, a broken quote): name it as the CSV reader does.
    if (source.kind === "csv") await locateInCsv(source, request);
    throw new InputError(source.label, "cannot be read", `${source.label}: ${(error as Error).message}`);
  }
}

/**
 * The doubles of a DOUBLE vector without NULLs, as DuckDB holds them (no copy per value), or null
 * for any other vector. node-api keeps `items` and `validity` private in its types; reading them
 * saves a BigInt validity test per value (32 million for 1M × 32), and the exact pin of
 * @duckdb/node-api keeps the shape fixed. A vector with NULLs takes `getItem`.
 */
function doubleItems(vector: unknown, size: number): Float64Array | null {
  if (!(vector instanceof DuckDBDoubleVector)) return null;
  const raw = vector as unknown as { items?: unknown; validity?: { data?: unknown; offset?: unknown } };
  if (!(raw.items instanceof Float64Array) || raw.items.length < size) return null;
  const mask = raw.validity?.data;
  if (mask === null) return raw.items.subarray(0, size);
  // DuckDB's CSV reader keeps a validity mask even when every value is valid: check its bits 32 at a time.
  if (!(mask instanceof BigUint64Array) || raw.validity?.offset !== 0) return null;
  const words = new Uint32Array(mask.buffer, mask.byteOffset, mask.length * 2);
  const full = size >>> 5;
  for (let w = 0; w < full; w++) if (words[w] !== 0xffffffff) return null;
  const rest = size & 31;
  if (rest > 0 && (words[full] & ((1 << rest) - 1)) !== (1 << rest) - 1) return null;
  return raw.items.subarray(0, size);
}

function text(value: DuckDBValue): string | null {
  return value === null || value === undefined ? null : String(value);
}

/** Throws the error for a bad value: the CSV reader's own for CSV files, by row for the others. */
async function badValue(source: DataSource, request: LedgerRequest, row: number, column: string, rule: string): Promise<never> {
  if (source.kind === "csv") await locateInCsv(source, request);
  throw new CsvError(source.label, null, column, rule, `${source.label} row ${row}, column '${column}': ${rule}`);
}

/** Reads a CSV file with the project's reader until it throws the error that names the bad cell. */
async function locateInCsv(source: DataSource, request: LedgerRequest): Promise<void> {
  const ledger = await openLedger(source.path, request);
  try {
    for await (const row of ledger.rows) void row;
  } finally {
    await ledger.rows.return();
  }
}
