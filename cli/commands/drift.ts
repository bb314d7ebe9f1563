/**
 * `isodense drift <model.json> <ledger> [--out report.json]`: the weekly report's drift table
 * for a file of payments. Each payment is bucketed on the model's reference edges exactly as the
 * scoring service counts traffic, and the table is computed by the same function as the weekly
 * report (`driftEntriesFor`), against the training share of each bucket. Run it on a refit's own
 * training ledger before publishing (every column should be stable, PSI near 0) or on a recent
 * export to see what the weekly report will say.
 */
import { resolve } from "node:path";
import { flagRateCheck, type DriftEntry, type FlagRateCheck } from "../../shared-model/src/drift";
import { compileModel, Scorer } from "../../shared-model/src/score";
import { formatHelp, parseArgs, stringOption, UsageError, type CommandSpec } from "../args";
import { EXIT_OK, reportFailure } from "../errors";
import { DriftTally } from "../drift-tally";
import { checkOutputPath, writeFileAtomic } from "../files";
import { processIO, writeLines, type CommandIO } from "../io";
import { openLedger } from "../ledger";
import { SOURCE_KINDS_TEXT, SOURCE_OPTIONS, sourceFromArgs } from "../sources/source";
import { recordsOfModel } from "../records";
import { formatCount, formatPercent } from "../numbers";
import { createProgress } from "../progress";
import { loadArtifact } from "./score";

/** Command line of `isodense drift`. */
export const driftSpec: CommandSpec = {
  command: "isodense drift",
  summary:
    "Compares a ledger's payments with the traffic a model was fitted on: population stability index per model column and " +
    "for the score (d²) against the training share of each reference bucket (levels: below 0.1 stable, 0.1 to 0.25 watch, " +
    "from 0.25 shifted), and the flag rate against the model's expected rate. The same computation as the weekly report.",
  positionals: [
    { name: "model.json", description: "model file written by isodense fit, tune or refit" },
    { name: "ledger", description: `payments with the model's feature columns: ${SOURCE_KINDS_TEXT}` },
  ],
  options: [
    ...SOURCE_OPTIONS,
    { name: "out", kind: "string", valueName: "report.json", description: "also write the report as JSON" },
    {
      name: "label-column",
      kind: "string",
      valueName: "column",
      description: "review labels: rows labelled fraud are left out, as the fit leaves them out",
      defaultText: "label if present",
    },
  ],
  notes: ["Exit codes: 0 report written (whatever the levels); 2 usage or input error (including a model file that fails verification)."],
};

/** What `isodense drift` reports (also the JSON of --out). */
export interface DriftReport {
  modelVersion: string;
  ledger: string;
  payments: number;
  rowsLeftOutAsFraud: number;
  /** Whether each bucket was compared with its counted training share or an assumed equal share. */
  baseline: "training shares" | "equal shares (the model file stores no training shares)";
  drift: DriftEntry[];
  flagged: number;
  flagRate: FlagRateCheck | null;
}

/**
 * Runs `isodense drift` with the words after `drift`.
 * @returns the exit code (0 or 2; 3 for an internal error)
 */
export async function driftCommand(argv: string[], io: CommandIO = processIO()): Promise<number> {
  const progress = createProgress(io.stderr);
  try {
    const args = parseArgs(argv, driftSpec);
    if (args.help) {
      io.stdout.write(formatHelp(driftSpec));
      return EXIT_OK;
    }
    const [modelPath, ledgerPath] = args.positionals;
    const out = stringOption(args, "out");
    if (out !== undefined) {
      for (const input of [modelPath, ledgerPath]) {
        if (resolve(out) === resolve(input)) throw new UsageError("--out", "same as an input", `option --out names an input file (${out}); choose another file`);
      }
      await checkOutputPath(out, "--out");
    }
    const artifact = await loadArtifact(modelPath);
    const scorer = new Scorer(compileModel(artifact));
    const source = sourceFromArgs(args, ledgerPath);
    const ledger = await openLedger(source, {
      features: artifact.features,
      labelColumn: stringOption(args, "label-column"),
      segmentColumn: artifact.segmentBy,
      records: recordsOfModel(artifact),
    });
    const tally = new DriftTally(artifact);
    let flagged = 0;
    let leftOut = 0;
    for await (const row of ledger.rows) {
      if (row.label === "fraud") {
        leftOut++;
        continue;
      }
      const result = scorer.score(row.values, row.segment);
      tally.add(row.values, result.mahalanobisSq);
      if (result.flagged) flagged++;
      if (tally.payments % 8192 === 0) progress.update("drift", tally.payments);
    }
    progress.done();
    const expected = artifact.cutoff.flagRate;
    const report: DriftReport = {
      modelVersion: artifact.version,
      ledger: source.kind === "csv" ? ledgerPath : source.label,
      payments: tally.payments,
      rowsLeftOutAsFraud: leftOut,
      baseline: artifact.reference.columnShares !== undefined ? "training shares" : "equal shares (the model file stores no training shares)",
      drift: tally.entries(),
      flagged,
      flagRate: tally.payments > 0 && expected !== null ? flagRateCheck(flagged, tally.payments, expected) : null,
    };
    if (out !== undefined) await writeFileAtomic(out, `${JSON.stringify(report, null, 2)}\n`);
    writeLines(io.stdout, reportLines(report, out));
    return EXIT_OK;
  } catch (error) {
    progress.done();
    return reportFailure(error, io, driftSpec.command);
  }
}

/** The report for people: one line per column, then the flag rate. */
export function reportLines(report: DriftReport, out: string | undefined): string[] {
  const width = Math.max(...report.drift.map((d) => d.name.length), 12);
  const lines = [
    `${formatCount(report.payments)} payments of ${report.ledger} against model ${report.modelVersion}` +
      (report.rowsLeftOutAsFraud > 0 ? ` (${formatCount(report.rowsLeftOutAsFraud)} rows labelled fraud left out)` : "") +
      `; baseline: ${report.baseline}`,
    ...report.drift.map(
      (d) => `  ${(d.name === "mahalanobisSq" ? "score (d²)" : d.name).padEnd(width)}  ${d.psi === null ? `—  ${d.note}` : `PSI ${d.psi.toFixed(3)}  ${d.level}`}`,
    ),
  ];
  const f = report.flagRate;
  if (f !== null) {
    lines.push(
      `flag rate ${formatPercent(f.observedRate)} (${formatCount(report.flagged)} flagged); expected ${formatPercent(f.expectedRate)}, ` +
        `95 % interval ${formatPercent(f.low)}–${formatPercent(f.high)}: ${f.verdict}`,
    );
  }
  if (out !== undefined) lines.push(`wrote ${out}`);
  return lines;
}
