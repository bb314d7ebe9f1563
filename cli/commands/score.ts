/**
 * `isodense score <model.json> <ledger> --out scores.csv`: backtests a model on a ledger (any
 * source: CSV, Parquet, a table or query of a DuckDB or SQLite database).
 * Writes one row per payment (log-density, d², tail probability, flag, the segment model used and
 * the strongest reason) and, when the ledger has labels, prints precision, recall, flag rate and
 * the confusion counts.
 */
import { readFile } from "node:fs/promises";
import { resolve } from "node:path";
import { parseArtifact, type ModelArtifact } from "../../shared-model/src/artifact";
import { compileModel, Scorer } from "../../shared-model/src/score";
import type { Reason } from "../../shared-model/src/types";
import { formatHelp, parseArgs, stringOption, UsageError, type CommandSpec } from "../args";
import { formatCsvRow } from "../csv";
import { EXIT_OK, InputError, reportFailure } from "../errors";
import { AtomicLineWriter, checkOutputPath } from "../files";
import { processIO, writeLines, type CommandIO } from "../io";
import { openLedger } from "../ledger";
import { SOURCE_KINDS_TEXT, SOURCE_OPTIONS, sourceFromArgs } from "../sources/source";
import { recordsOfModel } from "../records";
import { formatCount, formatForPeople, formatPercent } from "../numbers";
import { createProgress } from "../progress";

/** Command line of `isodense score`. */
export const scoreSpec: CommandSpec = {
  command: "isodense score",
  summary:
    "Scores every payment of a ledger with a model file and writes one CSV row per payment: " +
    "id, logDensity, mahalanobisSq, tailProbability, flagged, segment (the model that scored it; * = pooled), topReason. " +
    "With a label column it also prints precision, recall and flag rate.",
  positionals: [
    { name: "model.json", description: "model file written by isodense fit" },
    {
      name: "ledger",
      description: `payments with the model's feature columns, or payment records in time order when the model derives its features: ${SOURCE_KINDS_TEXT}`,
    },
  ],
  options: [
    ...SOURCE_OPTIONS,
    { name: "out", kind: "string", valueName: "scores.csv", description: "where to write the scores (required)" },
    { name: "id-column", kind: "string", valueName: "column", description: "id column copied to the output", defaultText: "id if present, else the row number" },
    { name: "label-column", kind: "string", valueName: "column", description: "review labels: fraud/legitimate or 1/0, empty = not reviewed", defaultText: "label if present" },
  ],
  notes: ["Exit codes: 0 written; 2 usage or input error (including a model file that fails verification)."],
};

/** Header of the scores file. */
export const SCORE_COLUMNS = ["id", "logDensity", "mahalanobisSq", "tailProbability", "flagged", "segment", "topReason"] as const;

/** Confusion counts over the labelled rows. */
export interface BacktestCounts {
  rows: number;
  flagged: number;
  labelled: number;
  truePositives: number;
  falsePositives: number;
  falseNegatives: number;
  trueNegatives: number;
}

/**
 * Runs `isodense score` with the words after `score`.
 * @returns the exit code (0 or 2; 3 for an internal error)
 */
export async function scoreCommand(argv: string[], io: CommandIO = processIO()): Promise<number> {
  const progress = createProgress(io.stderr);
  let writer: AtomicLineWriter | null = null;
  try {
    const args = parseArgs(argv, scoreSpec);
    if (args.help) {
      io.stdout.write(formatHelp(scoreSpec));
      return EXIT_OK;
    }
    const [modelPath, ledgerPath] = args.positionals;
    const out = stringOption(args, "out");
    if (out === undefined) throw new UsageError("--out", "required", "option --out is required (where to write the scores)");
    for (const input of [modelPath, ledgerPath]) {
      if (resolve(out) === resolve(input)) {
        throw new UsageError("--out", "same as an input", `option --out names an input file (${out}); choose another file`);
      }
    }
    const artifact = await loadArtifact(modelPath);
    await checkOutputPath(out, "--out");
    const model = compileModel(artifact);
    const scorer = new Scorer(model);
    const ledger = await openLedger(sourceFromArgs(args, ledgerPath), {
      features: artifact.features,
      idColumn: stringOption(args, "id-column"),
      labelColumn: stringOption(args, "label-column"),
      segmentColumn: artifact.segmentBy,
      records: recordsOfModel(artifact),
    });
    const counts: BacktestCounts = { rows: 0, flagged: 0, labelled: 0, truePositives: 0, falsePositives: 0, falseNegatives: 0, trueNegatives: 0 };
    let labelledFraud = 0;
    writer = new AtomicLineWriter(out);
    await writer.write(formatCsvRow(SCORE_COLUMNS));
    for await (const row of ledger.rows) {
      const result = scorer.score(row.values, row.segment);
      const [reason] = scorer.explain(row.values, row.segment, 1);
      await writer.write(
        formatCsvRow([row.id, result.logDensity, result.mahalanobisSq, result.tailProbability, result.flagged, result.segment, reason === undefined ? "" : describeReason(reason)]),
      );
      counts.rows++;
      if (result.flagged) counts.flagged++;
      if (row.label !== null) {
        counts.labelled++;
        if (row.label === "fraud") labelledFraud++;
        if (row.label === "fraud" && result.flagged) counts.truePositives++;
        else if (row.label === "fraud") counts.falseNegatives++;
        else if (result.flagged) counts.falsePositives++;
        else counts.trueNegatives++;
      }
      if (counts.rows % 8192 === 0) progress.update("score", counts.rows);
    }
    await writer.commit();
    writer = null;
    progress.done();
    const lines = [
      `scored ${formatCount(counts.rows)} rows with model ${artifact.version}; wrote ${out}`,
      `flagged ${formatCount(counts.flagged)} of ${formatCount(counts.rows)} rows (flag rate ${formatPercent(counts.flagged / counts.rows)}; cutoff d² > ${formatForPeople(artifact.cutoff.mahalanobisSq)})`,
    ];
    if (ledger.layout.labelColumn !== null) {
      lines.push(...metricLines(counts, labelledFraud, ledger.layout.labelColumn));
    }
    writeLines(io.stdout, lines);
    return EXIT_OK;
  } catch (error) {
    progress.done();
    if (writer !== null) await writer.abort();
    return reportFailure(error, io, scoreSpec.command);
  }
}

/**
 * Reads and verifies a model file (schema, linear algebra, checksum).
 * @throws InputError when the file is missing or not JSON; ArtifactError when it fails verification.
 */
export async function loadArtifact(path: string): Promise<ModelArtifact> {
  let text: string;
  try {
    text = await readFile(path, "utf8");
  } catch (error) {
    const code = (error as { code?: string }).code;
    throw new InputError(path, "cannot read", `${path}: ${code === "ENOENT" ? "model file not found" : (error as Error).message}`);
  }
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (error) {
    throw new InputError(path, "not JSON", `${path} is not valid JSON: ${(error as Error).message}`);
  }
  return parseArtifact(json);
}

/**
 * The strongest reason in the analyst's words and the feature's own units.
 * @example describeReason(reason) // "amount 1240 (expected 60–140)"
 */
export function describeReason(reason: Reason): string {
  const { low, high } = reason.expected;
  return `${reason.feature} ${formatForPeople(reason.actual, 6)} (expected ${formatForPeople(low, 3)}–${formatForPeople(high, 3)})`;
}

/** Precision, recall and confusion counts over the labelled rows, for people. */
export function metricLines(counts: BacktestCounts, labelledFraud: number, labelColumn: string): string[] {
  const { truePositives: tp, falsePositives: fp, falseNegatives: fn, trueNegatives: tn } = counts;
  const unlabelled = counts.rows - counts.labelled;
  const precision = tp + fp > 0 ? (tp / (tp + fp)).toFixed(3) : "n/a (no labelled row flagged)";
  const recall = tp + fn > 0 ? (tp / (tp + fn)).toFixed(3) : "n/a (no row labelled fraud)";
  const lines = [
    `labels in '${labelColumn}': ${formatCount(counts.labelled)} labelled (${formatCount(labelledFraud)} fraud, ${formatCount(counts.labelled - labelledFraud)} legitimate), ${formatCount(unlabelled)} unlabelled`,
    `precision ${precision}  recall ${recall}`,
    `TP ${formatCount(tp)}  FP ${formatCount(fp)}  FN ${formatCount(fn)}  TN ${formatCount(tn)}`,
  ];
  if (unlabelled > 0) {
    lines.push("note: unlabelled rows are left out of precision and recall; labels from reviewed flags alone overstate recall");
  }
  return lines;
}
