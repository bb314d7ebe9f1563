/**
 * `isodense fit <ledger> --out model.json …`: fits the Gaussian model to the normal traffic of
 * a ledger (rows labelled fraud are left out), prints what it did, and writes the artifact only
 * when everything succeeded.
 */
import { readFile } from "node:fs/promises";
import { basename, resolve } from "node:path";
import { FeatureSpecError, parseFeatureSpec } from "../../shared-model/src/features";
import { derivesFromRecords, parseRecordSpec, type RecordSpec } from "../../shared-model/src/records/spec";
import type { ModelArtifact } from "../../shared-model/src/artifact";
import type { FitOptions, FitReport } from "../../shared-model/src/fit";
import type { CovarianceShapeRequest, EstimatorName, FeatureDeclaration } from "../../shared-model/src/types";
import { formatHelp, numberOption, parseArgs, stringOption, UsageError, type CommandSpec } from "../args";
import { EXIT_OK, InputError, reportFailure } from "../errors";
import { checkOutputPath, writeFileAtomic } from "../files";
import { processIO, writeLines, type CommandIO } from "../io";
import { LedgerRowSource, type LedgerRequest } from "../ledger";
import { fitRowSource, fitSource } from "../sources/fit-source";
import { fitFromMomentsFiles } from "../sources/moments-files";
import { type DataSource, SOURCE_KINDS_TEXT, SOURCE_OPTIONS, sourceFromArgs } from "../sources/source";
import { createProgress } from "../progress";

/** Command line of `isodense fit`. */
export const fitSpec: CommandSpec = {
  command: "isodense fit",
  summary:
    "Fits mean and covariance of the normal payments in a ledger (CSV or Parquet file, or a table or query of a DuckDB or SQLite database) and writes a sealed model file. " +
    "Rows labelled fraud (label fraud or 1) are left out; unlabelled rows are kept.",
  positionals: [{ name: "ledger", description: `payments, one per row: ${SOURCE_KINDS_TEXT}`, optional: true }],
  options: [
    ...SOURCE_OPTIONS,
    {
      name: "moments",
      kind: "string",
      valueName: "result.csv",
      description: "finish a fit from the result of 'isodense sql moments' run on your own engine (instead of <ledger>)",
    },
    { name: "sample", kind: "string", valueName: "sample.csv", description: "with --moments: the result of 'isodense sql sample' (cutoff, drift edges, robust estimator)" },
    { name: "out", kind: "string", valueName: "model.json", description: "where to write the model (required)" },
    { name: "features", kind: "string", valueName: "a,b,…", description: "numeric columns used as they are (no transform)" },
    {
      name: "spec",
      kind: "string",
      valueName: "spec.json",
      description: 'feature spec with transforms: {"features":[{"name":"amount","transform":"log"}]}; with "record", features derived from payment records (docs/features.md)',
    },
    { name: "covariance", kind: "string", choices: ["full", "diagonal", "auto"], description: "covariance shape; auto is full when rows ≥ 10 × columns", defaultText: "auto" },
    { name: "estimator", kind: "string", choices: ["classical", "shrinkage", "robust"], description: "covariance estimator", defaultText: "classical" },
    { name: "id-column", kind: "string", valueName: "column", description: "id column (kept out of the features)", defaultText: "id if present" },
    { name: "label-column", kind: "string", valueName: "column", description: "review labels: fraud/legitimate or 1/0, empty = not reviewed", defaultText: "label if present" },
    { name: "segment-by", kind: "string", valueName: "column", description: "fit one model per value of this column, pooled for small ones" },
    { name: "cutoff-rate", kind: "number", valueName: "rate", greaterThan: 0, lessThan: 1, description: "share of training rows the cutoff flags", defaultText: "0.01" },
    { name: "support-fraction", kind: "number", valueName: "α", min: 0.5, max: 1, description: "robust only: least share of rows the MCD keeps", defaultText: "(m+n+1)/2 rows" },
    { name: "seed", kind: "integer", valueName: "N", min: 0, max: 2 ** 32 - 1, description: "seed for sampling and the robust fit", defaultText: "1" },
    { name: "min-segment-rows", kind: "integer", valueName: "N", min: 1, description: "rows a segment value needs for its own model", defaultText: "max(10 × columns, 200)" },
  ],
  notes: [
    "Give exactly one of --features and --spec, and either <ledger> or --moments with --sample.",
    'With a spec that has "record", a ledger of payment records (in time order) is derived on the way; a ledger that already has every feature column is read as it is.',
    "DuckDB reads a ledger of feature columns (memory limit 256 MB) in one pass; with a Yeo–Johnson feature the rows are also staged in a temporary file (8 bytes a value, removed at the end), λ is fitted on a sample and the moments read the staged copy.",
    "Exit codes: 0 written; 1 refused by diagnostics (each printed with its remedy; nothing written); 2 usage or input error.",
  ],
};

/**
 * Runs `isodense fit` with the words after `fit`.
 * @returns the exit code (0, 1 or 2; 3 for an internal error)
 * @example await fitCommand(["ledger.csv", "--out", "model.json", "--features", "amount,items"])
 */
export async function fitCommand(argv: string[], io: CommandIO = processIO()): Promise<number> {
  const progress = createProgress(io.stderr);
  try {
    const args = parseArgs(argv, fitSpec);
    if (args.help) {
      io.stdout.write(formatHelp(fitSpec));
      return EXIT_OK;
    }
    const [ledgerPath] = args.positionals;
    const momentsPath = stringOption(args, "moments");
    const samplePath = stringOption(args, "sample");
    if ((ledgerPath === undefined) === (momentsPath === undefined)) {
      throw new UsageError(
        "<ledger>",
        "ledger or --moments",
        "give the ledger to fit, or --moments result.csv with --sample sample.csv to finish a fit computed on your own SQL engine; one of them",
      );
    }
    if ((momentsPath === undefined) !== (samplePath === undefined)) {
      throw new UsageError("--sample", "with --moments", "--moments and --sample go together: the moments of every row and a sample of rows");
    }
    const out = stringOption(args, "out");
    if (out === undefined) throw new UsageError("--out", "required", "option --out is required (where to write the model file)");
    for (const input of [ledgerPath, momentsPath, samplePath]) {
      if (input !== undefined && resolve(out) === resolve(input)) {
        throw new UsageError("--out", "same as an input", `option --out names an input file (${out}); choose another file`);
      }
    }
    const spec = await readSpec(stringOption(args, "features"), stringOption(args, "spec"));
    const features = spec.features;
    await checkOutputPath(out, "--out");
    const segmentBy = stringOption(args, "segment-by") ?? null;
    const request = {
      features,
      idColumn: stringOption(args, "id-column"),
      labelColumn: stringOption(args, "label-column"),
      segmentColumn: segmentBy,
      records: derivesFromRecords(spec) ? spec : undefined,
    };
    const options: FitOptions = {
      features,
      shape: (stringOption(args, "covariance") ?? "auto") as CovarianceShapeRequest,
      estimator: (stringOption(args, "estimator") ?? "classical") as EstimatorName,
      segmentBy,
      minSegmentRows: numberOption(args, "min-segment-rows"),
      cutoffRate: numberOption(args, "cutoff-rate") ?? 0.01,
      seed: numberOption(args, "seed"),
      supportFraction: numberOption(args, "support-fraction"),
      recordSpec: spec,
      onProgress: (pass, rows) => progress.update(pass, rows),
    };
    const { artifact, report } =
      momentsPath !== undefined
        ? await fitFromMomentsFiles(momentsPath, samplePath!, request, { ...options, source: basename(momentsPath) })
        : await fitLedger(sourceFromArgs(args, ledgerPath!), request, options);
    progress.done();
    await writeFileAtomic(out, JSON.stringify(artifact, null, 2) + "\n");
    writeLines(io.stdout, [...report.lines, `wrote model ${artifact.version} to ${out}`]);
    return EXIT_OK;
  } catch (error) {
    progress.done();
    return reportFailure(error, io, fitSpec.command);
  }
}

/**
 * Fits a ledger: through DuckDB when it has the feature columns; a ledger of payment records
 * streams through the record deriver (features depend on each account's earlier rows, in order),
 * and a SQLite ledger through the SQLite reader, both into the same accumulator.
 */
async function fitLedger(source: DataSource, request: LedgerRequest, options: FitOptions): Promise<{ artifact: ModelArtifact; report: FitReport }> {
  if (request.records === undefined && source.kind !== "sqlite") return fitSource(source, request, options);
  const rows = new LedgerRowSource(source, request);
  // Header and columns are checked before the first pass, so a typo fails at once.
  const layout = await rows.layout();
  if (layout.records === null && source.kind !== "sqlite") return fitSource(source, request, options);
  return fitRowSource(rows, () => rows.counts, { ...options, source: source.label }, layout.records === null ? "read through SQLite" : "derived from records");
}

/**
 * Feature declarations from `--features a,b` (no transform) or `--spec file.json`; exactly one.
 * @throws UsageError when both or neither are given or a name is empty; InputError when the spec
 *   file is missing or not JSON, or breaks a rule (naming the feature and key).
 */
export async function readFeatures(list: string | undefined, specPath: string | undefined): Promise<FeatureDeclaration[]> {
  return (await readSpec(list, specPath)).features.map((f) => ({ name: f.name, transform: f.transform }));
}

/**
 * The spec from `--features a,b` (each read as it is) or `--spec file.json` (a feature spec, or a
 * record spec that derives features from payment records); exactly one.
 * @throws UsageError when both or neither are given or a name is empty; InputError when the spec
 *   file is missing or not JSON, or breaks a rule (naming the feature and key).
 */
export async function readSpec(list: string | undefined, specPath: string | undefined): Promise<RecordSpec> {
  if (list !== undefined && specPath !== undefined) {
    throw new UsageError("--features", "exclusive with --spec", "give either --features or --spec, not both");
  }
  if (list !== undefined) {
    const names = list.split(",").map((name) => name.trim());
    const empty = names.indexOf("");
    if (empty >= 0) {
      throw new UsageError("--features", "empty name", `option --features has an empty name at position ${empty + 1}; write names separated by commas, e.g. amount,items`);
    }
    try {
      // The spec's rules (name length, characters) apply to names given on the command line too.
      const declared = parseFeatureSpec({ features: names.map((name) => ({ name, transform: "none" })) });
      return parseRecordSpec({ features: declared });
    } catch (error) {
      if (error instanceof FeatureSpecError) {
        throw new UsageError(
          "--features",
          error.rule,
          `option --features: ${error.problems.map((p) => `${p.field.replace(/^features\[(\d+)\]\.name$/, (_, k) => `name ${Number(k) + 1}`)} ${p.rule}`).join("; ")}`,
        );
      }
      throw error;
    }
  }
  if (specPath === undefined) {
    throw new UsageError("--features", "required", "give the features: --features a,b,… (used as they are) or --spec spec.json (with transforms)");
  }
  let text: string;
  try {
    text = await readFile(specPath, "utf8");
  } catch (error) {
    const code = (error as { code?: string }).code;
    throw new InputError("--spec", "cannot read", `--spec ${specPath}: ${code === "ENOENT" ? "file not found" : (error as Error).message}`);
  }
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (error) {
    throw new InputError("--spec", "not JSON", `--spec ${specPath} is not valid JSON: ${(error as Error).message}`);
  }
  try {
    return parseRecordSpec(json);
  } catch (error) {
    if (error instanceof FeatureSpecError) {
      throw new InputError("--spec", error.rule, `--spec ${specPath}: ${error.problems.map((p) => `${p.field} ${p.rule}`).join("; ")}`);
    }
    throw error;
  }
}
