/**
 * Reading a payment ledger (CSV) into model inputs: the raw feature values in feature order, the
 * optional id, label and segment of every row, all validated with file/line/column errors.
 *
 * Labels: `fraud`/`legitimate` or `1`/`0`, case-insensitive, surrounding spaces ignored; an empty
 * cell means "not reviewed" and the row is kept. Rows labelled fraud are left out of every fit, so
 * confirmed fraud never widens the covariance that is meant to describe normal traffic.
 */
import type { FeatureDeclaration } from "../shared-model/src/types";
import { checkRawValue } from "../shared-model/src/features";
import type { FitRow, RowSource } from "../shared-model/src/fit";
import { CsvError, numberCell, requireColumn, type CsvReadOptions } from "./csv";
import { RecordDeriver, type RecordsSpec } from "./records";
import type { DataSource } from "./sources/source";
import { openSourceTable } from "./sources/table";

/** A review outcome: `fraud`, `legitimate`, or `null` when the row was never reviewed. */
export type Label = "fraud" | "legitimate" | null;

/** The header name used for labels when `--label-column` is not given and the ledger has it. */
export const DEFAULT_LABEL_COLUMN = "label";
/** The header name used for ids when `--id-column` is not given and the ledger has it. */
export const DEFAULT_ID_COLUMN = "id";

/**
 * Reads a label cell.
 * @returns the label, `null` for an empty cell, or `undefined` when the text is not a label.
 * @example parseLabel(" Fraud ") // "fraud"
 * @example parseLabel("0") // "legitimate"
 */
export function parseLabel(text: string): Label | undefined {
  const value = text.trim().toLowerCase();
  if (value === "") return null;
  if (value === "fraud" || value === "1") return "fraud";
  if (value === "legitimate" || value === "0") return "legitimate";
  return undefined;
}

/**
 * Reads a label cell or raises an error that names the line and the column.
 * @throws CsvError "ledger.csv line 9, column 'label': 'maybe' is not a label; expected fraud, legitimate, 1, 0 or an empty cell"
 */
export function labelCell(text: string, file: string, line: number, column: string): Label {
  const label = parseLabel(text);
  if (label === undefined) {
    throw new CsvError(file, line, column, `'${text}' is not a label; expected fraud, legitimate, 1, 0 or an empty cell`);
  }
  return label;
}

/**
 * An ISO-8601 time with a zone (2026-11-02T09:30:00Z, …+01:00) in epoch milliseconds; NaN otherwise.
 * @example parseIsoTime("2026-11-02T09:30:00Z") // 1793611800000
 */
export function parseIsoTime(text: string): number {
  const value = text.trim();
  return /^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:\d{2})$/.test(value) ? Date.parse(value) : Number.NaN;
}

/**
 * Reads a time cell (ISO-8601 with a zone, e.g. 2026-11-02T09:30:00Z) or raises an error naming the
 * line and the column.
 * @throws CsvError "ledger.csv line 4, column 'createdAt': 'yesterday' is not an ISO-8601 time with a zone"
 */
export function timeCell(text: string, file: string, line: number, column: string): number {
  const ms = parseIsoTime(text);
  if (!Number.isFinite(ms)) throw new CsvError(file, line, column, `'${text}' is not an ISO-8601 time with a zone, such as 2026-11-02T09:30:00Z`);
  return ms;
}

/** Which columns of a ledger to read. */
export interface LedgerRequest {
  /** Features, read as raw numbers in this order. */
  features: readonly FeatureDeclaration[];
  /** Id column; must exist when given. When absent, `id` is used if the header has it. */
  idColumn?: string;
  /** Label column; must exist when given. When absent, `label` is used if the header has it. */
  labelColumn?: string;
  /** Segment column; must exist when given. */
  segmentColumn?: string | null;
  /**
   * How the features derive from payment records (same features, same order). Used when the
   * header lacks a feature column: the rows are then payment records in time order, and each row's
   * features are derived from it and the account's earlier rows. A ledger that has every feature
   * column is read as it is.
   */
  records?: RecordsSpec;
  /**
   * Column holding each payment's time (ISO-8601 UTC), for commands that read a time window. A
   * ledger of payment records takes its time from the record spec instead.
   */
  timeColumn?: string;
}

/** Column positions resolved against one ledger's header. */
export interface LedgerLayout {
  file: string;
  header: string[];
  /** Header index of each feature, in feature order. */
  featureIndex: number[];
  /** Id column and its index, or `null`/-1 when rows are numbered instead. */
  idColumn: string | null;
  idIndex: number;
  /** Label column and its index, or `null`/-1 when the ledger has no labels. */
  labelColumn: string | null;
  labelIndex: number;
  /** Segment column and its index, or `null`/-1. */
  segmentColumn: string | null;
  segmentIndex: number;
  /** The spec the features are derived with, or `null` when the ledger has the feature columns. */
  records: RecordsSpec | null;
  /** Column of each payment's time and its index, or `null`/-1 (a records ledger's time comes from its spec). */
  timeColumn: string | null;
  timeIndex: number;
}

/**
 * Resolves the requested columns against a header.
 * @throws CsvError naming the missing column and listing the header, a feature listed twice, or a
 *   feature that is also the id, label or segment column.
 */
export function resolveLedgerLayout(header: readonly string[], file: string, request: LedgerRequest): LedgerLayout {
  const records = request.records !== undefined && request.features.some((f) => !header.includes(f.name)) ? request.records : null;
  if (records !== null) {
    // Checks the record columns now, so a missing one fails before any row is read.
    new RecordDeriver(records, file, header);
  }
  const seen = new Set<string>();
  for (const feature of request.features) {
    if (seen.has(feature.name)) {
      throw new CsvError(file, null, feature.name, "feature listed twice", `feature '${feature.name}' is listed twice; list each feature once`);
    }
    seen.add(feature.name);
  }
  const featureIndex = records !== null ? [] : request.features.map((f) => requireColumn(header, f.name, file, "feature"));
  const defaultId = records !== null ? records.record.id : header.includes(DEFAULT_ID_COLUMN) ? DEFAULT_ID_COLUMN : null;
  const idColumn = request.idColumn ?? defaultId;
  const idIndex = idColumn === null ? -1 : requireColumn(header, idColumn, file, "--id-column");
  const labelColumn = request.labelColumn ?? (header.includes(DEFAULT_LABEL_COLUMN) ? DEFAULT_LABEL_COLUMN : null);
  const labelIndex = labelColumn === null ? -1 : requireColumn(header, labelColumn, file, "--label-column");
  const segmentColumn = request.segmentColumn ?? null;
  const segmentIndex = segmentColumn === null ? -1 : requireColumn(header, segmentColumn, file, "segment column");
  const roles: [string | null, string][] = [
    [idColumn, "the id column"],
    [labelColumn, "the label column"],
    [segmentColumn, "the segment column"],
  ];
  for (const [column, role] of roles) {
    if (records === null && column !== null && seen.has(column)) {
      throw new CsvError(
        file,
        null,
        column,
        "feature reuses a special column",
        `column '${column}' of ${file} is both a feature and ${role}; features must be numeric columns other than the id, label and segment columns`,
      );
    }
  }
  const timeColumn = request.timeColumn ?? (records !== null ? records.record.time : null);
  const timeIndex = timeColumn === null ? -1 : requireColumn(header, timeColumn, file, "--time-column");
  return { file, header: [...header], featureIndex, idColumn, idIndex, labelColumn, labelIndex, segmentColumn, segmentIndex, records, timeColumn, timeIndex };
}

/** One validated ledger row. */
export interface LedgerRow {
  /** 1-based physical line where the row starts. */
  line: number;
  /** 1-based data-row number (the header is row 0). */
  rowNumber: number;
  /** The id cell, or the row number as text when the ledger has no id column. */
  id: string;
  label: Label;
  /** Segment value; `null` when there is no segment column or the cell is empty. */
  segment: string | null;
  /** Raw feature values in feature order (a fresh array per row). */
  values: Float64Array;
  /** The payment's time in epoch milliseconds; NaN when the ledger has no time column. */
  timeMs: number;
}

/** A ledger opened for one pass. */
export interface OpenLedger {
  layout: LedgerLayout;
  /** Validated rows; exhaust it or call `return()` to close the file. */
  rows: AsyncGenerator<LedgerRow, void, undefined>;
}

/**
 * Opens a ledger and streams its validated rows. Every feature cell is parsed strictly and checked
 * against its transform's domain (e.g. `log` needs > 0).
 * @param source a CSV path, or any source (CSV, Parquet, a table or query of a DuckDB or SQLite database)
 * @throws CsvError for any problem with the file, the header or a cell, naming file, line (row for
 *   database and Parquet sources) and column.
 */
export async function openLedger(source: string | DataSource, request: LedgerRequest, options: CsvReadOptions = {}): Promise<OpenLedger> {
  const table = await openSourceTable(source, options);
  let layout: LedgerLayout;
  try {
    layout = resolveLedgerLayout(table.header, table.file, request);
  } catch (error) {
    await table.rows.return();
    throw error;
  }
  const { file, header } = table;
  const features = request.features;
  const k = features.length;
  async function* rows(): AsyncGenerator<LedgerRow, void, undefined> {
    let rowNumber = 0;
    const deriver = layout.records === null ? null : new RecordDeriver(layout.records, file, header);
    for await (const record of table.rows) {
      rowNumber++;
      const cells = record.cells;
      const values = new Float64Array(k);
      let timeMs = Number.NaN;
      if (deriver !== null) {
        timeMs = deriver.derive(cells, record.line, values).timeMs;
        for (let j = 0; j < k; j++) {
          const problem = checkRawValue(features[j], values[j]);
          if (problem !== null) throw new CsvError(file, record.line, features[j].name, `derived value ${problem}`);
        }
      }
      for (let j = 0; deriver === null && j < k; j++) {
        const column = header[layout.featureIndex[j]];
        const value = numberCell(cells[layout.featureIndex[j]], file, record.line, column);
        const problem = checkRawValue(features[j], value);
        if (problem !== null) throw new CsvError(file, record.line, column, problem);
        values[j] = value;
      }
      if (deriver === null && layout.timeIndex >= 0) timeMs = timeCell(cells[layout.timeIndex], file, record.line, header[layout.timeIndex]);
      const label = layout.labelIndex < 0 ? null : labelCell(cells[layout.labelIndex], file, record.line, header[layout.labelIndex]);
      const segmentText = layout.segmentIndex < 0 ? "" : cells[layout.segmentIndex];
      yield {
        line: record.line,
        rowNumber,
        id: layout.idIndex < 0 ? String(rowNumber) : cells[layout.idIndex],
        label,
        segment: segmentText === "" ? null : segmentText,
        values,
        timeMs,
      };
    }
  }
  return { layout, rows: rows() };
}

/** Row counts of the last complete pass over a ledger. */
export interface LedgerCounts {
  /** Data rows in the file. */
  rowsRead: number;
  /** Rows labelled fraud, left out of the fit. */
  rowsExcludedAsFraud: number;
  /** Rows handed to the fit. */
  rowsUsed: number;
}

/**
 * A ledger as the fit's re-iterable {@link RowSource}: each `pass()` re-reads the file from the
 * first row (streaming, never loading it whole) and yields the rows not labelled fraud.
 * `counts` holds the numbers of the last complete pass.
 * @example
 * const source = new LedgerRowSource("ledger.csv", { features, segmentColumn: "channel" });
 * const { artifact } = await fitModel(source, { ...options, get rowsRead() { return source.counts.rowsRead; } });
 */
export class LedgerRowSource implements RowSource {
  /** Counts of the last complete pass (zero before the first). */
  counts: LedgerCounts = { rowsRead: 0, rowsExcludedAsFraud: 0, rowsUsed: 0 };

  constructor(
    private readonly path: string | DataSource,
    private readonly request: LedgerRequest,
    private readonly options: CsvReadOptions = {},
  ) {}

  /** Opens the ledger once to check its header and columns, without reading the rows. */
  async layout(): Promise<LedgerLayout> {
    const ledger = await openLedger(this.path, this.request, this.options);
    await ledger.rows.return();
    return ledger.layout;
  }

  async *pass(): AsyncGenerator<FitRow, void, undefined> {
    const ledger = await openLedger(this.path, this.request, this.options);
    const counts: LedgerCounts = { rowsRead: 0, rowsExcludedAsFraud: 0, rowsUsed: 0 };
    try {
      for await (const row of ledger.rows) {
        counts.rowsRead++;
        if (row.label === "fraud") {
          counts.rowsExcludedAsFraud++;
          continue;
        }
        counts.rowsUsed++;
        yield { values: row.values, segment: row.segment };
      }
    } finally {
      await ledger.rows.return();
    }
    this.counts = counts;
  }
}
