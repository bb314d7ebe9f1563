/**
 * Payment records → feature rows, for every CLI command that reads a ledger: each row's record
 * columns are read, the account's earlier rows give the history features (one definition with the
 * edge: shared-model/src/records), and the row's raw feature values come out in spec order. Works on
 * any stream of rows with a header, so it composes with whatever reads the ledger. Memory grows with
 * the number of accounts (each account's history is bounded by the spec's windows), not with rows.
 */
import { deriveInto } from "../shared-model/src/records/derive";
import { emptyHistory, recordPayment, type AccountHistory } from "../shared-model/src/records/history";
import { RecordInputError, recordColumns, recordFromFields, type PaymentRecord } from "../shared-model/src/records/record";
import { recordSpecFromArtifact, type ArtifactRecordFields } from "../shared-model/src/records/artifact-spec";
import { derivesFromRecords, type RecordMapping, type RecordSpec } from "../shared-model/src/records/spec";
import { CsvError, recordWord, requireColumn } from "./csv";

/** A spec that derives from records. */
export type RecordsSpec = RecordSpec & { record: RecordMapping };

/**
 * Derives feature rows from ledger rows that arrive in time order. One instance per pass.
 * @example
 * const deriver = new RecordDeriver(spec, "ledger.csv", header);
 * const record = deriver.derive(cells, line, values); // values[j] = feature j's raw value
 */
export class RecordDeriver {
  private readonly columns: string[];
  private readonly indexes: number[];
  private readonly histories = new Map<string, AccountHistory>();
  private lastTimeMs = -Infinity;
  private lastLine = 0;
  /** Accounts seen so far (each holds one bounded history). */
  get accounts(): number {
    return this.histories.size;
  }

  constructor(
    readonly spec: RecordsSpec,
    private readonly file: string,
    header: readonly string[],
  ) {
    this.columns = recordColumns(spec);
    this.indexes = this.columns.map((column) => requireColumn(header, column, file, "read by the spec"));
  }

  /**
   * Size of the account histories held, as the JSON a store keeps (UTF-8 bytes of each account's
   * history): the total and the largest. Walks every account: for reports, not per row.
   */
  heldBytes(): { total: number; largest: number } {
    let total = 0;
    let largest = 0;
    for (const history of this.histories.values()) {
      const bytes = Buffer.byteLength(JSON.stringify(history));
      total += bytes;
      largest = Math.max(largest, bytes);
    }
    return { total, largest };
  }

  /** The record of one row, before derivation, with the CLI's file/line/column errors. */
  recordOf(cells: readonly string[], line: number): PaymentRecord {
    const fields: Record<string, string> = {};
    for (let i = 0; i < this.columns.length; i++) fields[this.columns[i]] = cells[this.indexes[i]];
    return this.located(line, () => recordFromFields(this.spec, fields));
  }

  /**
   * Reads one row, derives its raw feature values into `out` from the account's earlier rows, and
   * records it.
   * @throws CsvError naming file, line and column: a malformed record field, a row earlier in time
   *   than the row before it, an id the account already used, a zero denominator or mean
   */
  derive(cells: readonly string[], line: number, out: Float64Array): PaymentRecord {
    return this.deriveRecord(this.recordOf(cells, line), line, out);
  }

  /** {@link derive} for a record already read (see {@link recordOf}). */
  deriveRecord(record: PaymentRecord, line: number, out: Float64Array): PaymentRecord {
    const mapping = this.spec.record;
    if (record.timeMs < this.lastTimeMs) {
      throw new CsvError(
        this.file,
        line,
        mapping.time,
        `${new Date(record.timeMs).toISOString()} is before ${recordWord(this.file)} ${this.lastLine} (${new Date(this.lastTimeMs).toISOString()}): ` +
          `a ledger of payment records must be in time order (sort it by ${mapping.time}, or run isodense derive with --sort)`,
      );
    }
    this.lastTimeMs = record.timeMs;
    this.lastLine = line;
    let history = this.histories.get(record.account);
    if (history === undefined) {
      history = emptyHistory();
      this.histories.set(record.account, history);
    }
    const held = history;
    this.located(line, () => deriveInto(this.spec, held, record, out));
    const added = this.located(line, () => recordPayment(this.spec, held, record));
    if (!added) {
      throw new CsvError(this.file, line, mapping.id, `repeats payment id '${record.id}' of an earlier row of account '${record.account}'; each payment must appear once`);
    }
    return record;
  }

  private located<T>(line: number, run: () => T): T {
    try {
      return run();
    } catch (error) {
      if (error instanceof RecordInputError) throw new CsvError(this.file, line, error.field, error.rule);
      throw error;
    }
  }
}

/**
 * The spec a model derives its features with, when it derives from payment records.
 * @example openLedger(path, { features: artifact.features, records: recordsOfModel(artifact) })
 */
export function recordsOfModel(artifact: ArtifactRecordFields): RecordsSpec | undefined {
  const spec = recordSpecFromArtifact(artifact);
  return spec !== null && derivesFromRecords(spec) ? spec : undefined;
}
