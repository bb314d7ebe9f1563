/**
 * DuckDB, embedded, as the offline commands' reading and aggregation engine: one in-process
 * database per command with a memory limit (it spills to a temporary folder beyond it), reading
 * CSV and Parquet files and tables or queries of DuckDB database files.
 */
import { type DuckDBConnection, type DuckDBDataChunk, DuckDBInstance, type DuckDBValue } from "@duckdb/node-api";
import { makeTempFolder, removeTempFolder } from "../temp-folders";

/** DuckDB's memory limit for isodense's queries; above it DuckDB spills to its temporary folder. */
export const DUCKDB_MEMORY_LIMIT = "256MB";

/** One embedded DuckDB database for the length of a command. */
export class DuckEngine {
  private constructor(
    private readonly instance: DuckDBInstance,
    private readonly connection: DuckDBConnection,
    private readonly tempFolder: string,
  ) {}

  /**
   * Opens an in-memory database with the memory limit, two threads at most, and a private
   * temporary folder for what does not fit.
   */
  static async open(): Promise<DuckEngine> {
    const tempFolder = makeTempFolder("isodense-duckdb-");
    const instance = await DuckDBInstance.create(":memory:", {
      memory_limit: DUCKDB_MEMORY_LIMIT,
      threads: "2",
      temp_directory: tempFolder,
      // No extension is ever fetched from the network: what isodense needs is built in.
      autoinstall_known_extensions: "false",
      autoload_known_extensions: "false",
    });
    const connection = await instance.connect();
    return new DuckEngine(instance, connection, tempFolder);
  }

  /** Runs statements that return nothing worth reading (ATTACH, CREATE, SET). */
  async execute(sql: string): Promise<void> {
    await this.connection.run(sql);
  }

  /** Runs a query and returns its rows as objects keyed by column name (small results only). */
  async rows(sql: string): Promise<Record<string, DuckDBValue>[]> {
    const reader = await this.connection.runAndReadAll(sql);
    return reader.getRowObjects();
  }

  /** Streams a query's result chunk by chunk (each up to 2,048 rows). */
  async *stream(sql: string): AsyncGenerator<DuckDBDataChunk, void, undefined> {
    const result = await this.connection.stream(sql);
    for (;;) {
      const chunk = await result.fetchChunk();
      if (chunk === null || chunk.rowCount === 0) return;
      yield chunk;
    }
  }

  /** Closes the database and removes its temporary folder. */
  close(): void {
    this.connection.closeSync();
    this.instance.closeSync();
    removeTempFolder(this.tempFolder);
  }
}

/** A text literal for DuckDB (single quotes doubled). */
export function sqlString(text: string): string {
  return `'${text.replace(/'/g, "''")}'`;
}
