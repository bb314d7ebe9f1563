/**
 * A table or query of a SQLite database file, read row by row through SQLite compiled to
 * WebAssembly (`node-sqlite3-wasm`: the database file is read page by page from disk, so memory
 * stays flat in rows, and nothing native is built or downloaded). The file is opened read-only.
 */
import sqliteWasm from "node-sqlite3-wasm";
import type { CsvRecord, CsvTable } from "../csv";
import { InputError } from "../errors";
import { quoteQualified } from "./duckdb-relation";
import type { DataSource } from "./source";
import { cellText, releasing } from "./cells";

// A CommonJS module: its classes come through the default export under Node's ESM loader.
const { Database } = sqliteWasm;
type Database = InstanceType<typeof Database>;

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
    throw new InputError(file, "cannot be read", `${file}: ${(error as Error).message}`);
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
      throw new InputError(file, "cannot be read", `${file}: ${(error as Error).message}`);
    }
  }
  const release = (): void => {
    if (statement !== null && !statement.isFinalized) statement.finalize();
    db.close();
  };
  return { file, header, rows: releasing(rows(), release) };
}
