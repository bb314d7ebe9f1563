/**
 * A table or query of a SQLite database file, read row by row through SQLite compiled to
 * WebAssembly (`node-sqlite3-wasm`: the database file is read page by page from disk, so memory
 * stays flat in rows, and nothing native is built or downloaded). The file is opened read-only.
 */
import { existsSync } from "node:fs";
import sqliteWasm from "node-sqlite3-wasm";
import type { CsvRecord, CsvTable } from "../csv";
import { InputError } from "../errors";
import { quoteQualified } from "./duckdb-relation";
import type { DataSource } from "./source";
import { cellText, releasing } from "./cells";

// A CommonJS module: its classes come through the default export under Node's ESM loader.
const { Database } = sqliteWasm;
type Database = InstanceType<typeof Database>;

/**
 * SQLite's message, naming the source. The WebAssembly build locks a database with a folder
 * `<file>.lock` beside it; one left by a reader that was killed keeps the file locked, so the
 * message says which folder to remove.
 */
function sqliteProblem(source: DataSource, error: unknown): InputError {
  const message = (error as Error).message;
  const lock = `${source.path}.lock`;
  const stale =
    /database is locked/i.test(message) && existsSync(lock)
      ? ` (the SQLite reader locks the file with the folder ${lock}; if no isodense command is reading it, remove that folder)`
      : "";
  return new InputError(source.label, "cannot be read", `${source.label}: ${message}${stale}`);
}

/** The temporary view that names the rows to read (temporary objects live outside the read-only file). */
const VIEW = "isodense_source";

/**
 * Opens a SQLite source as a table of text cells.
 * @throws InputError naming the source when SQLite cannot open the file or run the query
 */
export async function openSqliteTable(source: DataSource): Promise<CsvTable> {
  const file = source.label;
  let db: Database;
  try {
    db = new Database(source.path, { readOnly: true, fileMustExist: true });
  } catch (error) {
    throw new InputError(file, "cannot be read", `${file}: not a SQLite database SQLite can open (${(error as Error).message})`);
  }
  let header: string[];
  try {
    const select = source.table !== undefined ? `SELECT * FROM ${quoteQualified(source.table)}` : source.query!;
    db.exec(`CREATE TEMP VIEW ${VIEW} AS ${select}`);
    header = (db.all(`PRAGMA temp.table_info(${VIEW})`) as { name: string }[]).map((column) => column.name);
  } catch (error) {
    db.close();
    throw sqliteProblem(source, error);
  }
  let statement: ReturnType<Database["prepare"]> | null = null;
  async function* rows(): AsyncGenerator<CsvRecord, void, undefined> {
    statement = db.prepare(`SELECT * FROM temp.${VIEW}`);
    try {
      let row = 0;
      for (const values of statement.iterate() as Iterable<Record<string, unknown>>) {
        row++;
        yield { line: row, cells: header.map((name) => cellText(values[name])) };
      }
    } catch (error) {
      throw sqliteProblem(source, error);
    }
  }
  const release = (): void => {
    if (statement !== null && !statement.isFinalized) statement.finalize();
    db.close();
  };
  return { file, header, rows: releasing(rows(), release) };
}
