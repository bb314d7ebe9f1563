/**
 * Where a command's payments come from: a CSV or Parquet file, or a table or query of a DuckDB or
 * SQLite database file. The kind follows the file's extension; a database needs `--table` or
 * `--from-sql`.
 */
import { existsSync } from "node:fs";
import { basename, extname } from "node:path";
import { type OptionSpec, type ParsedArgs, stringOption, UsageError } from "../args";
import { InputError } from "../errors";

/** The kinds of source isodense reads. */
export type SourceKind = "csv" | "parquet" | "duckdb" | "sqlite";

/** A resolved source. */
export interface DataSource {
  kind: SourceKind;
  /** The file as the user named it. */
  path: string;
  /** Database sources: the table (or view) to read. */
  table?: string;
  /** Database sources: the query to read (a single SELECT). */
  query?: string;
  /** How reports and errors name the source: the file name, with the table or "query" for databases. */
  label: string;
}

const EXTENSIONS: Record<string, SourceKind> = {
  ".csv": "csv",
  ".parquet": "parquet",
  ".pq": "parquet",
  ".duckdb": "duckdb",
  ".ddb": "duckdb",
  ".sqlite": "sqlite",
  ".sqlite3": "sqlite",
  ".db": "sqlite",
};

/** The options that pick what to read from a database source; every command that reads payments takes them. */
export const SOURCE_OPTIONS: readonly OptionSpec[] = [
  { name: "table", kind: "string", valueName: "name", description: "database sources (.duckdb, .sqlite): the table or view to read" },
  {
    name: "from-sql",
    kind: "string",
    valueName: "query",
    description: "database sources: a query to read, e.g. \"SELECT * FROM payments WHERE day >= '2026-11-01'\"",
  },
];

/** What a source positional accepts, for the help text. */
export const SOURCE_KINDS_TEXT = ".csv (header row), .parquet, or a .duckdb / .sqlite database with --table or --from-sql";

/**
 * The source named by a positional and the command's `--table` / `--from-sql`.
 * @throws as {@link resolveSource}
 */
export function sourceFromArgs(args: ParsedArgs, path: string, role = "<ledger>"): DataSource {
  return resolveSource(path, { table: stringOption(args, "table"), fromSql: stringOption(args, "from-sql") }, role);
}

/** A path read as a CSV file whatever its name (callers that name a CSV file directly). */
export function csvSource(path: string): DataSource {
  return { kind: "csv", path, label: basename(path) };
}

/**
 * Resolves a positional file and the `--table` / `--from-sql` options into a source.
 * @param role how usage errors name the positional, e.g. `<ledger>`
 * @throws UsageError for an unknown extension, a table or query given for a file, a database
 *   without either, or both; InputError when the file does not exist
 * @example resolveSource("ledger.parquet", {}) // { kind: "parquet", path: "ledger.parquet", label: "ledger.parquet" }
 */
export function resolveSource(path: string, options: { table?: string; fromSql?: string }, role = "<ledger>"): DataSource {
  const kind = EXTENSIONS[extname(path).toLowerCase()];
  if (kind === undefined) {
    throw new UsageError(
      role,
      "unknown file kind",
      `${role} ${path}: the extension must say what the file is: .csv, .parquet, .duckdb (DuckDB database) or .sqlite/.db (SQLite database)`,
    );
  }
  if (!existsSync(path)) throw new InputError(role, "file not found", `${role} ${path}: file not found`);
  const { table, fromSql } = options;
  const name = basename(path);
  if (kind === "csv" || kind === "parquet") {
    if (table !== undefined || fromSql !== undefined) {
      throw new UsageError(
        table !== undefined ? "--table" : "--from-sql",
        "only for databases",
        `${table !== undefined ? "--table" : "--from-sql"} reads a DuckDB or SQLite database; ${path} is a ${kind} file`,
      );
    }
    return { kind, path, label: name };
  }
  if ((table === undefined) === (fromSql === undefined)) {
    throw new UsageError(
      "--table",
      "one of --table and --from-sql",
      `${path} is a database: give the table to read (--table NAME) or a query (--from-sql "SELECT …"), one of them`,
    );
  }
  if (fromSql !== undefined) {
    const query = fromSql.trim().replace(/;\s*$/, "");
    if (!/^(select|with|from|values)\b/i.test(query) || query.includes(";")) {
      throw new UsageError("--from-sql", "one SELECT", "--from-sql must hold a single query (SELECT …, WITH … or FROM …) and nothing else");
    }
    return { kind, path, query, label: `${name} (query)` };
  }
  return { kind, path, table, label: `${name} table ${table}` };
}
