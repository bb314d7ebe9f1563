/**
 * `isodense derive <ledger> --spec spec.json --out features.csv`: turns a ledger of payment
 * records into feature rows with the spec's derivations, the same code the edge runs on every live
 * payment. Streams: memory grows with the number of accounts, not rows (except with --sort).
 */
import { resolve } from "node:path";
import { derivesFromRecords } from "../../shared-model/src/records/spec";
import type { PaymentRecord } from "../../shared-model/src/records/record";
import { formatHelp, parseArgs, stringOption, UsageError, type CommandSpec } from "../args";
import { formatCsvRow, requireColumn } from "../csv";
import { EXIT_OK, InputError, reportFailure } from "../errors";
import { AtomicLineWriter, checkOutputPath } from "../files";
import { processIO, writeLines, type CommandIO } from "../io";
import { DEFAULT_LABEL_COLUMN } from "../ledger";
import { formatCount } from "../numbers";
import { createProgress } from "../progress";
import { RecordDeriver } from "../records";
import { SOURCE_KINDS_TEXT, SOURCE_OPTIONS, sourceFromArgs } from "../sources/source";
import { openSourceTable } from "../sources/table";
import { readSpec } from "./fit";

/** Command line of `isodense derive`. */
export const deriveSpec: CommandSpec = {
  command: "isodense derive",
  summary:
    "Derives every feature of a record spec from a ledger of payment records and writes one CSV row per payment: " +
    "the record's id, segment and time, the label when the ledger has one, then each feature's raw value (before transforms).",
  positionals: [{ name: "ledger", description: `payment records in time order: ${SOURCE_KINDS_TEXT}` }],
  options: [
    ...SOURCE_OPTIONS,
    { name: "spec", kind: "string", valueName: "spec.json", description: 'record spec: {"record":{"id":…,"time":…,"account":…},"features":[…]} (required; docs/features.md)' },
    { name: "out", kind: "string", valueName: "features.csv", description: "where to write the feature rows (required)" },
    { name: "label-column", kind: "string", valueName: "column", description: "label column copied to the output", defaultText: "label if present" },
    { name: "sort", kind: "switch", description: "sort the ledger by time first (holds its record columns in memory) instead of refusing a row out of time order" },
  ],
  notes: [
    "Values use the account's earlier payments only: same account, time strictly before the payment's time.",
    "Exit codes: 0 written; 2 usage or input error (file, line and column named; nothing written).",
  ],
};

interface PendingRow {
  record: PaymentRecord;
  line: number;
  label: string;
}

/**
 * Runs `isodense derive` with the words after `derive`.
 * @returns the exit code (0 or 2; 3 for an internal error)
 * @example await deriveCommand(["ledger.csv", "--spec", "spec.json", "--out", "features.csv"])
 */
export async function deriveCommand(argv: string[], io: CommandIO = processIO()): Promise<number> {
  const progress = createProgress(io.stderr);
  let writer: AtomicLineWriter | null = null;
  try {
    const args = parseArgs(argv, deriveSpec);
    if (args.help) {
      io.stdout.write(formatHelp(deriveSpec));
      return EXIT_OK;
    }
    const [ledgerPath] = args.positionals;
    const out = stringOption(args, "out");
    if (out === undefined) throw new UsageError("--out", "required", "option --out is required (where to write the feature rows)");
    if (resolve(out) === resolve(ledgerPath)) {
      throw new UsageError("--out", "same as the ledger", `option --out names the ledger itself (${out}); choose another file`);
    }
    const specPath = stringOption(args, "spec");
    if (specPath === undefined) throw new UsageError("--spec", "required", "option --spec is required (the record spec that says how each feature is derived)");
    const spec = await readSpec(undefined, specPath);
    if (!derivesFromRecords(spec)) {
      throw new InputError("--spec", "no record", `--spec ${specPath}: has no "record" (the id, time and account columns), so there is nothing to derive; see docs/features.md`);
    }
    await checkOutputPath(out, "--out");

    const table = await openSourceTable(sourceFromArgs(args, ledgerPath));
    const { file, header } = table;
    let deriver: RecordDeriver;
    let labelIndex: number;
    try {
      deriver = new RecordDeriver(spec, file, header);
      const labelColumn = stringOption(args, "label-column") ?? (header.includes(DEFAULT_LABEL_COLUMN) ? DEFAULT_LABEL_COLUMN : null);
      labelIndex = labelColumn === null ? -1 : requireColumn(header, labelColumn, file, "--label-column");
    } catch (error) {
      await table.rows.return();
      throw error;
    }
    const mapping = spec.record;
    const values = new Float64Array(spec.features.length);
    writer = new AtomicLineWriter(out);
    await writer.write(
      formatCsvRow([
        mapping.id,
        ...(mapping.segment === undefined ? [] : [mapping.segment]),
        mapping.time,
        ...(labelIndex < 0 ? [] : [header[labelIndex]]),
        ...spec.features.map((f) => f.name),
      ]),
    );
    let rows = 0;
    const emit = async (record: PaymentRecord, line: number, label: string): Promise<void> => {
      deriver.deriveRecord(record, line, values);
      const cells: (string | number)[] = [record.id];
      if (mapping.segment !== undefined) cells.push(record.segment ?? "");
      cells.push(new Date(record.timeMs).toISOString());
      if (labelIndex >= 0) cells.push(label);
      for (let j = 0; j < values.length; j++) cells.push(values[j]);
      await writer!.write(formatCsvRow(cells));
      rows++;
      if (rows % 8192 === 0) progress.update("derive", rows);
    };
    const pending: PendingRow[] = [];
    try {
      for await (const row of table.rows) {
        const record = deriver.recordOf(row.cells, row.line);
        const label = labelIndex < 0 ? "" : row.cells[labelIndex];
        if (args.options.get("sort") === true) pending.push({ record, line: row.line, label });
        else await emit(record, row.line, label);
      }
    } finally {
      await table.rows.return();
    }
    // Array.prototype.sort is stable: payments at the same instant keep their ledger order.
    pending.sort((a, b) => a.record.timeMs - b.record.timeMs);
    for (const row of pending) await emit(row.record, row.line, row.label);
    await writer.commit();
    writer = null;
    progress.done();
    writeLines(io.stdout, [`derived ${spec.features.length} features for ${formatCount(rows)} payments of ${formatCount(deriver.accounts)} accounts; wrote ${out}`]);
    return EXIT_OK;
  } catch (error) {
    progress.done();
    if (writer !== null) await writer.abort();
    return reportFailure(error, io, deriveSpec.command);
  }
}
