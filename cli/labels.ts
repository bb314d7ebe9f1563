/**
 * Reading the labelled set: the review app's export of decided payments (one row per decision)
 * with the model's feature columns, the outcome (`fraud` / `legitimate`, or 1 / 0), the weight
 * 1 / inclusion probability (1 for flags, 1/rate for audit draws; Horvitz & Thompson 1952) and the
 * payment id. The export marks text cells that a spreadsheet would read as a formula with a leading
 * apostrophe (shared-model's spreadsheet-cell.ts); the header, the id and the segment are read back
 * through {@link restoreTextCell}, so ids survive the round trip exactly. Labels fit in memory (they are a small share of traffic), so the whole set is read
 * at once and every row is validated with file, line and column in the message.
 */
import type { FeatureDeclaration } from "../shared-model/src/types";
import { checkRawValue } from "../shared-model/src/features";
import { RecordDeriver, type RecordsSpec } from "./records";
import { CsvError, numberCell, recordWord, requireColumn, type CsvReadOptions } from "./csv";
import type { DataSource } from "./sources/source";
import { openSourceTable } from "./sources/table";
import { labelCell } from "./ledger";
import { restoreTextCell } from "../shared-model/src/spreadsheet-cell";

/** Id columns tried in order when none is named: the brief's name, then the export's `id`. */
export const DEFAULT_LABELS_ID_COLUMNS = ["transactionId", "id"] as const;
/** Outcome column when none is named. */
export const DEFAULT_OUTCOME_COLUMN = "outcome";
/** Weight column when none is named. */
export const DEFAULT_WEIGHT_COLUMN = "weight";
/**
 * The export's column with the segment key that scored each payment (`*` = pooled); used when the
 * model's own segment column is not in the file, since scoring by that key picks the same model.
 */
export const EXPORT_SEGMENT_COLUMN = "segment";

/** Which columns to read and how to treat repeated ids. */
export interface LabelsRequest {
  /** The model's features, read as raw numbers in this order. */
  features: readonly FeatureDeclaration[];
  /** Id column; must exist when given. Default: the first of {@link DEFAULT_LABELS_ID_COLUMNS} present. */
  idColumn?: string;
  /** Outcome column; must exist when given. Default {@link DEFAULT_OUTCOME_COLUMN} (must exist). */
  labelColumn?: string;
  /** Weight column; must exist when given. Default {@link DEFAULT_WEIGHT_COLUMN} when present, else every weight is 1. */
  weightColumn?: string;
  /** Segment column; must exist when given. */
  segmentColumn?: string;
  /**
   * Segment columns tried in order when `segmentColumn` is not given (e.g. the model's
   * `segmentBy`, then {@link EXPORT_SEGMENT_COLUMN}); none present means every row is pooled.
   */
  segmentCandidates?: readonly string[];
  /**
   * `refuse` (default): a repeated id is an error (a payment counted twice would double its
   * weight). `merge-agreeing`: later rows with the same id and outcome are skipped (the export of
   * several model versions can hold one payment twice); a conflicting outcome is still an error.
   */
  duplicates?: "refuse" | "merge-agreeing";
  /**
   * How the model derives its features from payment records. Used when the file lacks a feature
   * column: its rows are then payment records in time order (see `LedgerRequest.records`).
   */
  records?: RecordsSpec;
}

/** The labelled set in memory, in file order. */
export interface LabelSet {
  file: string;
  /** Rows kept (after merging agreeing duplicates). */
  rows: number;
  /** Rows skipped as agreeing duplicates. */
  duplicatesSkipped: number;
  ids: string[];
  /** 1 = fraud, 0 = legitimate. */
  fraud: Uint8Array;
  /** 1 / inclusion probability, ≥ 1. */
  weights: Float64Array;
  /** Raw feature values, row-major (rows × features). */
  values: Float64Array;
  /** Segment value per row, or null (pooled). */
  segments: (string | null)[];
  /** 1-based physical line of each row, for messages. */
  lines: number[];
  fraudCount: number;
  idColumn: string;
  labelColumn: string;
  /** Null when the file has no weight column and none was named (every weight is then 1). */
  weightColumn: string | null;
  segmentColumn: string | null;
}

/**
 * Reads and validates a labelled set from a CSV path or any source (Parquet, a table or query of a
 * DuckDB or SQLite database; rows are then named by number).
 * @throws CsvError naming file, line and column: a missing column (listing the header), a feature
 *   cell that is not a number or outside its transform's domain, an outcome that is empty or not
 *   fraud/legitimate/1/0, a weight that is not a number ≥ 1, an empty id, a repeated id
 * @example const labels = await readLabels("labels.csv", { features: artifact.features, segmentCandidates: ["channel", "segment"] });
 */
export async function readLabels(source: string | DataSource, request: LabelsRequest, options: CsvReadOptions = {}): Promise<LabelSet> {
  const table = await openSourceTable(source, options);
  const file = table.file;
  const header = table.header.map(restoreTextCell);
  try {
    const k = request.features.length;
    const records = request.records !== undefined && request.features.some((f) => !header.includes(f.name)) ? request.records : null;
    const deriver = records === null ? null : new RecordDeriver(records, file, header);
    const derived = new Float64Array(k);
    const featureIndex = deriver !== null ? [] : request.features.map((f) => requireColumn(header, f.name, file, "feature of the model"));
    const idColumn = request.idColumn ?? DEFAULT_LABELS_ID_COLUMNS.find((c) => header.includes(c));
    if (idColumn === undefined) {
      throw new CsvError(
        file,
        null,
        null,
        "no id column",
        `${file} has no id column: expected one of ${DEFAULT_LABELS_ID_COLUMNS.join(", ")} (or name it with --id-column); columns are: ${header.join(", ")}`,
      );
    }
    const idIndex = requireColumn(header, idColumn, file, "--id-column");
    const labelColumn = request.labelColumn ?? DEFAULT_OUTCOME_COLUMN;
    const labelIndex = requireColumn(header, labelColumn, file, "--label-column");
    const weightColumn = request.weightColumn ?? (header.includes(DEFAULT_WEIGHT_COLUMN) ? DEFAULT_WEIGHT_COLUMN : null);
    const weightIndex = weightColumn === null ? -1 : requireColumn(header, weightColumn, file, "--weight-column");
    const segmentColumn = request.segmentColumn ?? request.segmentCandidates?.find((c) => header.includes(c)) ?? null;
    const segmentIndex = segmentColumn === null ? -1 : requireColumn(header, segmentColumn, file, "--segment-column");
    for (const [column, role] of [
      [idColumn, "the id column"],
      [labelColumn, "the outcome column"],
      [weightColumn, "the weight column"],
      [segmentColumn, "the segment column"],
    ] as const) {
      if (deriver === null && column !== null && request.features.some((f) => f.name === column)) {
        throw new CsvError(file, null, column, "feature reuses a special column", `column '${column}' of ${file} is both a feature of the model and ${role}`);
      }
    }

    const ids: string[] = [];
    const fraud: number[] = [];
    const weights: number[] = [];
    const values: number[] = [];
    const segments: (string | null)[] = [];
    const lines: number[] = [];
    const seen = new Map<string, { line: number; fraud: boolean }>();
    let duplicatesSkipped = 0;
    for await (const record of table.rows) {
      const cells = record.cells;
      // Every row joins its account's history, also one skipped below as a repeat.
      deriver?.derive(cells.map(restoreTextCell), record.line, derived);
      const id = restoreTextCell(cells[idIndex]);
      if (id.trim() === "") throw new CsvError(file, record.line, idColumn, "the id is empty; every decided payment needs its id");
      const label = labelCell(cells[labelIndex], file, record.line, labelColumn);
      if (label === null) {
        throw new CsvError(file, record.line, labelColumn, "the outcome is empty; the labelled set holds decided payments only (fraud, legitimate, 1 or 0)");
      }
      const isFraud = label === "fraud";
      const earlier = seen.get(id);
      if (earlier !== undefined) {
        if (request.duplicates === "merge-agreeing" && earlier.fraud === isFraud) {
          duplicatesSkipped++;
          continue;
        }
        throw new CsvError(
          file,
          record.line,
          idColumn,
          "repeated id",
          `${file} ${recordWord(file)} ${record.line}: id '${id}' already appears on ${recordWord(file)} ${earlier.line}` +
            (earlier.fraud === isFraud ? "; each payment may be labelled once (export one model version)" : " with the other outcome; resolve the conflict first"),
        );
      }
      seen.set(id, { line: record.line, fraud: isFraud });
      let weight = 1;
      if (weightIndex >= 0) {
        weight = numberCell(cells[weightIndex], file, record.line, header[weightIndex]);
        if (!(weight >= 1)) {
          throw new CsvError(file, record.line, header[weightIndex], `${cells[weightIndex]} is not a weight: it is 1 / inclusion probability, so at least 1`);
        }
      }
      for (let j = 0; j < k; j++) {
        const column = deriver === null ? header[featureIndex[j]] : request.features[j].name;
        const value = deriver === null ? numberCell(cells[featureIndex[j]], file, record.line, column) : derived[j];
        const problem = checkRawValue(request.features[j], value);
        if (problem !== null) throw new CsvError(file, record.line, column, deriver === null ? problem : `derived value ${problem}`);
        values.push(value);
      }
      const segmentText = segmentIndex < 0 ? "" : restoreTextCell(cells[segmentIndex]);
      ids.push(id);
      fraud.push(isFraud ? 1 : 0);
      weights.push(weight);
      segments.push(segmentText === "" ? null : segmentText);
      lines.push(record.line);
    }
    return {
      file,
      rows: ids.length,
      duplicatesSkipped,
      ids,
      fraud: Uint8Array.from(fraud),
      weights: Float64Array.from(weights),
      values: Float64Array.from(values),
      segments,
      lines,
      fraudCount: fraud.reduce((s, x) => s + x, 0),
      idColumn,
      labelColumn,
      weightColumn,
      segmentColumn,
    };
  } finally {
    await table.rows.return();
  }
}
