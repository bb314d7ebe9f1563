/**
 * Streaming CSV (RFC 4180) reader and writer for ledgers.
 *
 * The reader takes the file in chunks and never holds more than one chunk plus the record being
 * built, so a ledger of any size streams in flat memory. It accepts quoted fields with doubled
 * quotes, CRLF or LF line ends (a CRLF split across two chunks counts once), line breaks inside
 * quotes, and strips a leading UTF-8 byte-order mark. Entirely empty lines between records are
 * skipped. Every error names the file, the 1-based physical line and, where known, the column.
 */
import { InputError } from "../shared-model/src/input-error";
import { createReadStream } from "node:fs";
import { quoteCsvCell } from "../shared-model/src/spreadsheet-cell";
import { whyNotANumber } from "./numbers";

/** A problem in a CSV file, located by file, physical line (1-based) and column name. */
export class CsvError extends InputError {
  /** File as the user named it. */
  readonly file: string;
  /** 1-based physical line of the problem, or `null` when it concerns the whole file. */
  readonly line: number | null;
  /** Column name (or `cell N` before the header is known), or `null`. */
  readonly column: string | null;

  /**
   * @param message full sentence shown to the user; when omitted it is built from the parts as
   *   "<file> line <line>, column '<column>': <rule>".
   */
  constructor(file: string, line: number | null, column: string | null, rule: string, message?: string) {
    // The field is the column when there is one, else the file.
    super(column ?? file, rule, message ?? locate(file, line, column) + rule);
    this.file = file;
    this.line = line;
    this.column = column;
  }
}

/** Labels of sources whose rows are numbered rather than located by physical line (databases, Parquet). */
const rowNumberedSources = new Set<string>();

/**
 * Says that the `line` of errors about `label` is a 1-based row number (a database or Parquet
 * source read as a table), so messages say "row N" instead of "line N".
 */
export function markRowNumbered(label: string): void {
  rowNumberedSources.add(label);
}

/** How messages about `file` say where a record is: "line" for CSV files, "row" for database and Parquet sources. */
export function recordWord(file: string): "line" | "row" {
  return rowNumberedSources.has(file) ? "row" : "line";
}

function locate(file: string, line: number | null, column: string | null): string {
  let where = file;
  if (line !== null) where += ` ${recordWord(file)} ${line}`;
  if (column !== null) where += `, column '${column}'`;
  return where + ": ";
}

const COMMA = 44;
const QUOTE = 34;
const CR = 13;
const LF = 10;
const BOM = 0xfeff;

// Parser states.
const FIELD_START = 0;
const UNQUOTED = 1;
const QUOTED = 2;
const QUOTE_SEEN = 3; // inside a quoted field, just after a quote: either "" (escaped) or the closing quote

/**
 * Push parser: feed chunks with `write`, then call `end`; each complete record is handed to
 * `onRecord` with the physical line on which it starts. The `cells` array is handed over (not
 * reused), so the receiver may keep it.
 *
 * @example
 * const rows: string[][] = [];
 * const p = new CsvParser((cells) => rows.push(cells), "x.csv");
 * p.write('a,"b\r\n'); p.write('c"\r\n1,2'); p.end(); // rows = [["a", "b\r\nc"], ["1", "2"]]
 */
export class CsvParser {
  private state = FIELD_START;
  private cells: string[] = [];
  /** Text of the current field carried over from earlier chunks or before an escaped quote. */
  private partial = "";
  /** Physical line of the next character. */
  private line = 1;
  private recordLine = 1;
  private recordOpen = false;
  private afterCR = false;
  private quoteLine = 0;
  private started = false;
  private ended = false;

  constructor(
    private readonly onRecord: (cells: string[], line: number) => void,
    private readonly file = "input",
  ) {}

  /**
   * Parses one chunk of text.
   * @throws CsvError on a quote inside an unquoted field or text after a closing quote.
   */
  write(chunk: string): void {
    if (this.ended) throw new Error("CsvParser.write called after end()");
    const len = chunk.length;
    let i = 0;
    if (!this.started && len > 0) {
      this.started = true;
      if (chunk.charCodeAt(0) === BOM) i = 1;
    }
    let start = i;
    let state = this.state;
    for (; i < len; i++) {
      const c = chunk.charCodeAt(i);
      if (this.afterCR) {
        this.afterCR = false;
        if (c === LF) {
          // Second half of a CRLF: the line was counted at the CR. Inside quotes it stays content.
          if (state !== QUOTED) start = i + 1;
          continue;
        }
      }
      switch (state) {
        case FIELD_START:
          if (c === QUOTE) {
            this.openRecord();
            state = QUOTED;
            this.quoteLine = this.line;
            start = i + 1;
          } else if (c === COMMA) {
            this.openRecord();
            this.cells.push("");
            start = i + 1;
          } else if (c === CR || c === LF) {
            if (this.recordOpen) {
              this.cells.push("");
              this.emit();
            }
            this.newLine(c);
            start = i + 1;
          } else {
            this.openRecord();
            state = UNQUOTED;
            start = i;
          }
          break;
        case UNQUOTED:
          if (c === COMMA) {
            this.cells.push(this.partial + chunk.slice(start, i));
            this.partial = "";
            state = FIELD_START;
            start = i + 1;
          } else if (c === CR || c === LF) {
            this.cells.push(this.partial + chunk.slice(start, i));
            this.partial = "";
            this.emit();
            state = FIELD_START;
            this.newLine(c);
            start = i + 1;
          } else if (c === QUOTE) {
            this.fail(`a quote appears inside an unquoted field; quote the whole cell and double the quotes inside it (RFC 4180)`);
          }
          break;
        case QUOTED:
          if (c === QUOTE) {
            this.partial += chunk.slice(start, i);
            state = QUOTE_SEEN;
          } else if (c === CR || c === LF) {
            this.newLine(c);
          }
          break;
        case QUOTE_SEEN:
          if (c === QUOTE) {
            // Escaped quote: keep this one as content.
            state = QUOTED;
            start = i;
          } else if (c === COMMA) {
            this.cells.push(this.partial);
            this.partial = "";
            state = FIELD_START;
            start = i + 1;
          } else if (c === CR || c === LF) {
            this.cells.push(this.partial);
            this.partial = "";
            this.emit();
            state = FIELD_START;
            this.newLine(c);
            start = i + 1;
          } else {
            this.fail(`unexpected '${chunk[i]}' after a closing quote; a quoted cell must end at a comma or a line end`);
          }
          break;
      }
    }
    if (state === QUOTED || state === UNQUOTED) this.partial += chunk.slice(start, len);
    this.state = state;
  }

  /**
   * Finishes the input: emits the last record if the file does not end with a line break.
   * @throws CsvError when a quoted field is never closed.
   */
  end(): void {
    if (this.ended) return;
    this.ended = true;
    switch (this.state) {
      case QUOTED:
        throw new CsvError(this.file, this.quoteLine, null, `a quoted cell opened on line ${this.quoteLine} is never closed`);
      case UNQUOTED:
      case QUOTE_SEEN:
        this.cells.push(this.partial);
        this.partial = "";
        this.emit();
        break;
      case FIELD_START:
        if (this.recordOpen) {
          this.cells.push("");
          this.emit();
        }
        break;
    }
  }

  private openRecord(): void {
    if (!this.recordOpen) {
      this.recordOpen = true;
      this.recordLine = this.line;
    }
  }

  private newLine(c: number): void {
    this.line++;
    if (c === CR) this.afterCR = true;
  }

  private emit(): void {
    const cells = this.cells;
    this.cells = [];
    this.recordOpen = false;
    this.onRecord(cells, this.recordLine);
  }

  private fail(rule: string): never {
    throw new CsvError(this.file, this.line, `cell ${this.cells.length + 1}`, rule);
  }
}

/** One record of a CSV file with the physical line it starts on. */
export interface CsvRecord {
  /** 1-based physical line of the record's first character. */
  line: number;
  cells: string[];
}

/**
 * Parses CSV text that is already in memory, optionally split into chunks (as a stream would
 * deliver it). Used for small inputs and to test the streaming parser.
 * @throws CsvError as {@link CsvParser} does.
 * @example parseCsvChunks(["a,b\r", "\n1,2\n"]) // [{line:1,cells:["a","b"]},{line:2,cells:["1","2"]}]
 */
export function parseCsvChunks(chunks: Iterable<string>, file = "input"): CsvRecord[] {
  const records: CsvRecord[] = [];
  const parser = new CsvParser((cells, line) => records.push({ line, cells }), file);
  for (const chunk of chunks) parser.write(chunk);
  parser.end();
  return records;
}

/** Options for reading a CSV file. */
export interface CsvReadOptions {
  /** Name used in messages; defaults to the path as given. */
  label?: string;
  /** Bytes per read; the default 64 KiB keeps memory flat. */
  chunkSize?: number;
}

/**
 * Streams the records of a CSV file (header included) chunk by chunk.
 * Stops reading and closes the file when the consumer stops early.
 * @throws CsvError when the file cannot be read or is not valid CSV.
 */
export async function* readCsvRecords(path: string, options: CsvReadOptions = {}): AsyncGenerator<CsvRecord, void, undefined> {
  const file = options.label ?? path;
  const stream = createReadStream(path, { encoding: "utf8", highWaterMark: options.chunkSize ?? 64 * 1024 });
  const queue: CsvRecord[] = [];
  const parser = new CsvParser((cells, line) => queue.push({ line, cells }), file);
  try {
    try {
      for await (const chunk of stream) {
        parser.write(chunk as string);
        for (let k = 0; k < queue.length; k++) yield queue[k];
        queue.length = 0;
      }
    } catch (error) {
      throw asReadError(error, file);
    }
    parser.end();
    for (let k = 0; k < queue.length; k++) yield queue[k];
  } finally {
    stream.destroy();
  }
}

function asReadError(error: unknown, file: string): unknown {
  if (error instanceof CsvError) return error;
  const code = (error as { code?: string } | null)?.code;
  if (code === "ENOENT") return new CsvError(file, null, null, "file not found", `${file}: file not found`);
  if (code === "EISDIR") return new CsvError(file, null, null, "is a directory", `${file}: is a directory, not a CSV file`);
  if (code === "EACCES") return new CsvError(file, null, null, "permission denied", `${file}: permission denied`);
  return error;
}

/** A CSV file opened for streaming: its header, and its data rows (checked against the header width). */
export interface CsvTable {
  /** File as named in messages. */
  file: string;
  header: string[];
  /** Data rows in file order; each has exactly `header.length` cells. Read once. */
  rows: AsyncGenerator<CsvRecord, void, undefined>;
}

/**
 * Opens a CSV file with a header row: validates the header (no empty or duplicate names), checks
 * that at least one data row follows, and returns a generator over the data rows that raises a
 * {@link CsvError} for a row whose cell count differs from the header's.
 *
 * The caller must either exhaust `rows` or call `rows.return()` to close the file.
 * @throws CsvError for an empty file, a header without data rows, or a bad header.
 */
export async function openCsvTable(path: string, options: CsvReadOptions = {}): Promise<CsvTable> {
  const file = options.label ?? path;
  const records = readCsvRecords(path, options);
  const first = await records.next();
  if (first.done) {
    throw new CsvError(file, null, null, "empty file", `${file} is empty; a header row naming the columns is required`);
  }
  let header: string[];
  try {
    header = checkHeader(first.value, file);
  } catch (error) {
    await records.return();
    throw error;
  }
  const second = await records.next();
  if (second.done) {
    throw new CsvError(file, null, null, "no data rows", `${file} has a header but no data rows`);
  }
  const width = header.length;
  async function* rows(): AsyncGenerator<CsvRecord, void, undefined> {
    try {
      let record: CsvRecord | undefined = second.value as CsvRecord;
      while (record !== undefined) {
        if (record.cells.length !== width) {
          throw new CsvError(
            file,
            record.line,
            null,
            "ragged row",
            `${file} line ${record.line} has ${record.cells.length} ${record.cells.length === 1 ? "cell" : "cells"}; the header has ${width}`,
          );
        }
        yield record;
        const next = await records.next();
        record = next.done ? undefined : next.value;
      }
    } finally {
      await records.return();
    }
  }
  return { file, header, rows: rows() };
}

function checkHeader(record: CsvRecord, file: string): string[] {
  const header = record.cells;
  const seen = new Map<string, number>();
  header.forEach((name, k) => {
    if (name.trim() === "") {
      throw new CsvError(file, record.line, `cell ${k + 1}`, "empty column name", `${file} line ${record.line}: header cell ${k + 1} is empty; every column needs a name`);
    }
    const earlier = seen.get(name);
    if (earlier !== undefined) {
      throw new CsvError(
        file,
        record.line,
        name,
        "duplicate column name",
        `${file} line ${record.line}: column '${name}' appears twice in the header (cells ${earlier + 1} and ${k + 1}); column names must be unique`,
      );
    }
    seen.set(name, k);
  });
  return header;
}

/**
 * Index of a named column in a header.
 * @param role how the column was asked for, e.g. "feature", "--label-column"; used in the message.
 * @throws CsvError "column 'amount' not found in header of ledger.csv; columns are: …"
 */
export function requireColumn(header: readonly string[], name: string, file: string, role?: string): number {
  const index = header.indexOf(name);
  if (index < 0) {
    const asked = role ? ` (${role})` : "";
    throw new CsvError(file, null, name, "column not found", `column '${name}'${asked} not found in header of ${file}; columns are: ${header.join(", ")}`);
  }
  return index;
}

/**
 * Parses a numeric cell strictly (see `parseStrictNumber`).
 * @throws CsvError "ledger.csv line 42, column 'amount': 'abc' is not a number"
 */
export function numberCell(text: string, file: string, line: number, column: string): number {
  const problem = whyNotANumber(text);
  if (problem !== null) throw new CsvError(file, line, column, problem);
  return Number(text);
}

/**
 * Writes one cell as RFC 4180 requires: quoted when it holds a comma, a quote or a line break,
 * with inner quotes doubled. Numbers use JavaScript's shortest round-trip form.
 * @example formatCsvCell('say "hi"') // '"say ""hi"""'
 */
export function formatCsvCell(value: string | number | boolean): string {
  return quoteCsvCell(String(value));
}

/** Writes one CSV row, cells quoted as needed, ending with LF. */
export function formatCsvRow(values: readonly (string | number | boolean)[]): string {
  let out = "";
  for (let k = 0; k < values.length; k++) out += (k === 0 ? "" : ",") + formatCsvCell(values[k]);
  return out + "\n";
}
