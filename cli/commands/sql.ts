/**
 * `isodense sql moments|sample --spec spec.json --source TABLE …`: prints one query to run on the
 * user's own SQL engine. `moments` computes, per segment, the count, means and co-moments of the
 * transformed features of every row (fraud left out); `sample` draws a uniform sample of rows.
 * `isodense fit --moments result.csv --sample sample.csv` finishes the fit from both results.
 */
import { fitFeatures } from "../../shared-model/src/features";
import { DEFAULT_FIT_SEED, FIT_SAMPLE_ROWS, type FitRow } from "../../shared-model/src/fit";
import { needsFittedParameters } from "../../shared-model/src/fit-transforms";
import { momentsQuery, sampleQuery, SQL_DIALECTS, SqlRequestError, type SqlDialect } from "../../shared-model/src/sql-moments";
import type { FeatureDeclaration, FittedFeature } from "../../shared-model/src/types";
import { formatHelp, numberOption, parseArgs, stringOption, UsageError, type CommandSpec } from "../args";
import { EXIT_OK, InputError, reportFailure } from "../errors";
import { processIO, writeLines, type CommandIO } from "../io";
import { openLedger } from "../ledger";
import { readFeatures } from "./fit";

/** Command line of `isodense sql`. */
export const sqlSpec: CommandSpec = {
  command: "isodense sql",
  summary:
    "Prints a query for your own SQL engine: 'moments' (count, means and co-moments of the transformed features per segment, fraud left out) " +
    "or 'sample' (a uniform sample of rows). Export each result as CSV with a header row and run 'isodense fit --moments result.csv --sample sample.csv'.",
  positionals: [{ name: "moments|sample", description: "which query to print" }],
  options: [
    { name: "spec", kind: "string", valueName: "spec.json", description: "feature spec with transforms (required unless --features)" },
    { name: "features", kind: "string", valueName: "a,b,…", description: "numeric columns used as they are (no transform)" },
    { name: "source", kind: "string", valueName: "table", description: "table or view to read, or a parenthesised query: '(SELECT …)' (required)" },
    { name: "dialect", kind: "string", choices: SQL_DIALECTS, description: "SQL dialect", defaultText: "ansi" },
    { name: "label-column", kind: "string", valueName: "column", description: "review labels: rows labelled fraud or 1 are left out" },
    { name: "segment-by", kind: "string", valueName: "column", description: "one row of moments per value of this column" },
    { name: "sample", kind: "string", valueName: "sample.csv", description: "moments only: the sample's result, on which Yeo–Johnson λ are fitted first" },
    { name: "rows", kind: "integer", valueName: "N", min: 1, description: "sample only: rows to draw", defaultText: String(FIT_SAMPLE_ROWS) },
    { name: "seed", kind: "integer", valueName: "N", min: 0, max: 2 ** 31 - 1, description: "sample only: seed of the draw (duckdb, postgres)", defaultText: "1" },
    { name: "percent", kind: "number", valueName: "p", greaterThan: 0, max: 100, description: "sample only, ansi: share of rows to draw (TABLESAMPLE BERNOULLI)" },
  ],
  notes: [
    "Features with a fitted parameter (yeo-johnson) need the sample first: run 'sql sample', export it, then 'sql moments --sample sample.csv'.",
    "The moments query counts rows whose values break a feature's rule; 'fit --moments' refuses while any remain.",
  ],
};

/**
 * Runs `isodense sql` with the words after `sql`.
 * @returns the exit code (0 or 2)
 * @example await sqlCommand(["moments", "--features", "amount,items", "--source", "payments", "--dialect", "postgres"])
 */
export async function sqlCommand(argv: string[], io: CommandIO = processIO()): Promise<number> {
  try {
    const args = parseArgs(argv, sqlSpec);
    if (args.help) {
      io.stdout.write(formatHelp(sqlSpec));
      return EXIT_OK;
    }
    const [which] = args.positionals;
    if (which !== "moments" && which !== "sample") {
      throw new UsageError("<moments|sample>", "unknown query", `'isodense sql' prints 'moments' or 'sample'; got '${which}'`);
    }
    const source = stringOption(args, "source");
    if (source === undefined) throw new UsageError("--source", "required", "option --source is required: the table or view to read, or '(SELECT …)'");
    const decls = await readFeatures(stringOption(args, "features"), stringOption(args, "spec"));
    const dialect = (stringOption(args, "dialect") ?? "ansi") as SqlDialect;
    const labelColumn = stringOption(args, "label-column") ?? null;
    const segmentBy = stringOption(args, "segment-by") ?? null;
    const samplePath = stringOption(args, "sample");
    let sql: string;
    if (which === "sample") {
      const features = decls.map((d) => ({ name: d.name, transform: d.transform, columns: [d.name] }) as FittedFeature);
      sql = sampleQuery({
        features,
        source,
        labelColumn,
        segmentBy,
        dialect,
        rows: numberOption(args, "rows") ?? FIT_SAMPLE_ROWS,
        seed: numberOption(args, "seed") ?? DEFAULT_FIT_SEED,
        percent: numberOption(args, "percent"),
      });
    } else {
      const features = await fittedForSql(decls, samplePath, segmentBy);
      sql = momentsQuery({ features, source, labelColumn, segmentBy, dialect });
    }
    writeLines(io.stdout, [sql.endsWith(";") ? sql : `${sql};`]);
    return EXIT_OK;
  } catch (error) {
    if (error instanceof SqlRequestError) return reportFailure(new UsageError(`--${error.field}`, error.rule, `${error.field}: ${error.rule}`), io, sqlSpec.command);
    return reportFailure(error, io, sqlSpec.command);
  }
}

/** The features with their parameters fitted on the sample when any needs one. */
async function fittedForSql(decls: FeatureDeclaration[], samplePath: string | undefined, segmentBy: string | null): Promise<FittedFeature[]> {
  if (!needsFittedParameters(decls)) return fitFeatures(decls, () => new Float64Array(0));
  if (samplePath === undefined) {
    const names = decls.filter((d) => d.transform === "yeo-johnson").map((d) => d.name);
    throw new InputError(
      "--sample",
      "needed for yeo-johnson",
      `${names.join(", ")} ${names.length === 1 ? "has" : "have"} a Yeo–Johnson power to fit: run 'isodense sql sample' first, export its result as CSV and pass it with --sample`,
    );
  }
  const ledger = await openLedger(samplePath, { features: decls, segmentColumn: segmentBy });
  const rows: FitRow[] = [];
  for await (const row of ledger.rows) rows.push({ values: row.values, segment: row.segment });
  return fitFeatures(decls, (j) => Float64Array.from(rows, (row) => row.values[j]));
}
