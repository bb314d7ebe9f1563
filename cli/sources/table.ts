/**
 * The one reader of a command's payments as a table of text cells, whatever the source: a CSV file
 * through the project's own CSV reader (its file/line/column errors unchanged), a Parquet file or a
 * table or query of a DuckDB database through DuckDB, a table or query of a SQLite database
 * through SQLite (compiled to WebAssembly, so nothing is built or downloaded). The ledger reader,
 * the labels reader and the record deriver all read through it, so every command that reads
 * payments accepts the same sources.
 *
 * Cells of database sources are the values as text: numbers in JavaScript's shortest round-trip
 * form (so a double survives the trip exactly), an SQL NULL as an empty cell, a timestamp with a
 * time zone in ISO 8601 UTC (`2026-11-01T10:00:00.000000Z`). A `CsvRecord.line` of a database
 * source is its 1-based row number, and messages say "row N".
 */
import { type CsvReadOptions, type CsvRecord, type CsvTable, CsvError, markRowNumbered, openCsvTable } from "../csv";
import { InputError } from "../errors";
import { cellText, releasing } from "./cells";
import { DuckEngine } from "./duckdb-engine";
import { duckRelation } from "./duckdb-relation";
import { type DataSource, csvSource } from "./source";
import { openSqliteTable } from "./sqlite-table";

/**
 * Opens a source as a table of text cells.
 * @param source a resolved source, or a path read as a CSV file (messages name it as given)
 * @throws CsvError for a CSV problem or an empty header; InputError when a database or Parquet
 *   file cannot be read
 * @example const table = await openSourceTable(resolveSource("ledger.parquet", {}));
 */
export async function openSourceTable(source: DataSource | string, options: CsvReadOptions = {}): Promise<CsvTable> {
  const resolved = typeof source === "string" ? csvSource(source) : source;
  if (resolved.kind === "csv") return openCsvTable(resolved.path, { ...options, label: options.label ?? (typeof source === "string" ? source : resolved.path) });
  markRowNumbered(resolved.label);
  if (resolved.kind === "sqlite") return openSqliteTable(resolved);
  return openDuckTable(resolved);
}

/** Rows selected from a Parquet file or a DuckDB database, streamed chunk by chunk. */
async function openDuckTable(source: DataSource): Promise<CsvTable> {
  const engine = await DuckEngine.open();
  let select: string;
  let header: string[];
  try {
    const opened = await duckRelation(engine, source);
    header = opened.header;
    // An instant is written in UTC with its zone, as the record reader requires; the rest go to JavaScript as they are.
    const columns = opened.types.map((type, i) => (type === "TIMESTAMP WITH TIME ZONE" ? `strftime(timezone('UTC', "c${i}"), '%Y-%m-%dT%H:%M:%S.%fZ')` : `"c${i}"`));
    select = `SELECT ${columns.join(", ")} FROM (SELECT * FROM ${opened.relation}) AS source(${opened.header.map((_, i) => `"c${i}"`).join(", ")})`;
  } catch (error) {
    engine.close();
    throw error;
  }
  const file = source.label;
  async function* rows(): AsyncGenerator<CsvRecord, void, undefined> {
    let row = 0;
    try {
      for await (const chunk of engine.stream(select)) {
        const columns = header.map((_, c) => chunk.getColumnValues(c));
        for (let r = 0; r < chunk.rowCount; r++) {
          row++;
          yield { line: row, cells: columns.map((values) => cellText(values[r])) };
        }
      }
    } catch (error) {
      if (error instanceof CsvError || error instanceof InputError) throw error;
      throw new InputError(file, "cannot be read", `${file}: ${(error as Error).message}`);
    }
  }
  return { file, header, rows: releasing(rows(), () => engine.close()) };
}
