/**
 * A source as a relation DuckDB can select from: `read_csv(…)` or `read_parquet(…)` for files, a
 * table or query of a DuckDB database file attached read-only. One place for how each kind is
 * opened, shared by the typed fit path and the text table every other command reads.
 */
import { quoteIdentifier } from "../../shared-model/src/sql-moments";
import { InputError } from "../errors";
import { type DuckEngine, sqlString } from "./duckdb-engine";
import type { DataSource } from "./source";

/** A relation DuckDB can select from, with its column names in order. */
export interface DuckRelation {
  /** A table function call, a quoted table name or a parenthesised query. */
  relation: string;
  header: string[];
  /** DuckDB's type of each column (e.g. `DOUBLE`, `VARCHAR`, `TIMESTAMP WITH TIME ZONE`). */
  types: string[];
}

/**
 * Makes a Parquet file or a DuckDB database source selectable in `engine` (a database is attached
 * read-only and made the default catalog).
 * @param csvColumns for a CSV file: the header (read by the project's own reader) and the columns to read as DOUBLE
 * @throws InputError naming the source when DuckDB cannot open it, or for a SQLite source
 */
export async function duckRelation(engine: DuckEngine, source: DataSource, csvColumns?: { header: string[]; doubles: ReadonlySet<string> }): Promise<DuckRelation> {
  try {
    if (source.kind === "csv") {
      if (csvColumns === undefined) throw new Error("a CSV relation needs its header");
      const { header, doubles } = csvColumns;
      const types = header.map((name) => (doubles.has(name) ? "DOUBLE" : "VARCHAR"));
      const columns = header.map((name, i) => `${sqlString(name)}: '${types[i]}'`);
      const relation = `read_csv(${sqlString(source.path)}, header = true, auto_detect = false, buffer_size = 2097152, delim = ',', quote = '"', escape = '"', columns = {${columns.join(", ")}})`;
      return { relation, header, types };
    }
    let relation: string;
    if (source.kind === "parquet") {
      relation = `read_parquet(${sqlString(source.path)})`;
    } else if (source.kind === "duckdb") {
      await engine.execute(`ATTACH ${sqlString(source.path)} AS ledger_db (READ_ONLY)`);
      await engine.execute("USE ledger_db");
      relation = source.table !== undefined ? quoteQualified(source.table) : `(${source.query})`;
    } else {
      throw new InputError("<ledger>", "SQLite through DuckDB", `${source.path}: SQLite databases are read by the SQLite reader, not DuckDB`);
    }
    const described = await engine.rows(`DESCRIBE SELECT * FROM ${relation}`);
    return { relation, header: described.map((r) => String(r.column_name)), types: described.map((r) => String(r.column_type)) };
  } catch (error) {
    if (error instanceof InputError) throw error;
    throw new InputError(source.label, "cannot be read", `${source.label}: ${(error as Error).message}`);
  }
}

/** A table name, possibly schema-qualified (`main.payments`), each part quoted. */
export function quoteQualified(name: string): string {
  return name
    .split(".")
    .map((part) => quoteIdentifier(part))
    .join(".");
}
