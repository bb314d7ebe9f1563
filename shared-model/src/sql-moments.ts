/**
 * SQL text that computes, on the user's own engine, what a fit needs from every row: per segment
 * (and pooled as `*`) the count, the means and the population co-moments of the transformed
 * features, each feature's raw range, and counts of rows that break a feature's domain; plus a
 * query that draws a uniform sample of raw rows. isodense then finishes the fit from the small
 * results (`fitFromMoments`). Pure string building: no engine is touched here.
 *
 * The transforms are written to compute exactly what `transformInto` computes (features.ts), with
 * the functions SQL:2016 and the engines share (LN, EXP, SIN, COS): log1p(x) as LN(1 + x) and
 * expm1(y) as EXP(y) − 1, which differ from the library functions only in the last bits for
 * arguments near 0. Aggregates: AVG and COVAR_POP (SQL:2003 T621), which PostgreSQL (Youngs–Cramer
 * updates since 12), DuckDB, Spark SQL, Trino, BigQuery and Snowflake compute stably.
 */
import { MAX_SEGMENTS } from "./artifact";
import { columnsOf } from "./features";
import type { FittedFeature } from "./types";

/** SQL dialects isodense writes: identifiers, string type and sampling differ; the maths does not. */
export type SqlDialect = "duckdb" | "postgres" | "ansi";

/** The dialects, for option checking. */
export const SQL_DIALECTS: readonly SqlDialect[] = ["duckdb", "postgres", "ansi"];

/** What the queries read. */
export interface SqlSourceRequest {
  /** Features with their fitted parameters (Yeo–Johnson λ), in model order. */
  features: readonly FittedFeature[];
  /** A table name (written as given, may be schema-qualified) or a parenthesised query. */
  source: string;
  /** Label column: rows labelled fraud (`fraud` or `1`, any case) are left out; `null` keeps every row. */
  labelColumn: string | null;
  /** Segment column, or `null` for one pooled model. */
  segmentBy: string | null;
  dialect: SqlDialect;
}

/** Why a request cannot be written as SQL, naming the field. */
export class SqlRequestError extends Error {
  constructor(
    readonly field: string,
    readonly rule: string,
  ) {
    super(`${field}: ${rule}`);
    this.name = "SqlRequestError";
  }
}

/** Names of the result columns of {@link momentsQuery}, so the reader and the writer agree. */
export const MOMENT_COLUMNS = {
  segment: "segment",
  rows: "row_count",
  mean: (c: number) => `mean_${c}`,
  covariance: (i: number, j: number) => `covar_${i}_${j}`,
  min: (f: number) => `raw_min_${f}`,
  max: (f: number) => `raw_max_${f}`,
  invalid: (f: number) => `invalid_${f}`,
  lambda: (f: number) => `lambda_${f}`,
  invalidLabels: "invalid_labels",
  fraudRows: "fraud_rows",
} as const;

/** The key of the pooled model among the segments. */
export const POOLED_SEGMENT = "*";

/**
 * A quoted identifier (double quotes, doubled inside) for every dialect here: SQL-92 delimited
 * identifiers, which PostgreSQL, DuckDB, Trino and Snowflake accept (Spark SQL and BigQuery need
 * backticks: write the source as a query there).
 * @example quoteIdentifier('amount "eur"') // "\"amount \"\"eur\"\"\""
 */
export function quoteIdentifier(name: string): string {
  return `"${name.replace(/"/g, '""')}"`;
}

/** A double literal that every dialect reads back as the same binary64 value. */
function doubleLiteral(value: number, dialect: SqlDialect): string {
  if (!Number.isFinite(value)) throw new SqlRequestError("parameter", `must be finite; got ${value}`);
  // The shortest round-trip decimal, cast from text so no engine reads it as a lower-precision decimal.
  return `CAST('${String(value)}' AS ${doubleType(dialect)})`;
}

function doubleType(dialect: SqlDialect): string {
  return dialect === "duckdb" ? "DOUBLE" : "DOUBLE PRECISION";
}

function textType(dialect: SqlDialect): string {
  return dialect === "postgres" ? "TEXT" : dialect === "duckdb" ? "VARCHAR" : "VARCHAR(1000)";
}

/** The domain rule of a raw value `v` (already a double): finite, and what its transform needs. */
function domainCheck(feature: FittedFeature, v: string): string {
  // v − v = 0 is false for ±Infinity and NaN in every dialect here (NaN compares unequal to 0).
  const finite = `${v} IS NOT NULL AND ${v} - ${v} = 0`;
  switch (feature.transform) {
    case "log":
      return `${finite} AND ${v} > 0`;
    case "log1p":
      return `${finite} AND ${v} > -1`;
    case "cyclic-hour":
      return `${finite} AND ${v} >= 0 AND ${v} < 24`;
    default:
      return finite;
  }
}

/** The model columns of one feature as SQL expressions over its raw value `v`. */
export function transformSql(feature: FittedFeature, v: string, dialect: SqlDialect): string[] {
  switch (feature.transform) {
    case "none":
      return [v];
    case "log":
      return [`LN(${v})`];
    case "log1p":
      return [`LN(1 + ${v})`];
    case "cyclic-hour": {
      const radiansPerHour = doubleLiteral((2 * Math.PI) / 24, dialect);
      return [`SIN(${radiansPerHour} * ${v})`, `COS(${radiansPerHour} * ${v})`];
    }
    case "yeo-johnson": {
      const lambda = feature.lambda;
      if (typeof lambda !== "number" || !Number.isFinite(lambda)) {
        throw new SqlRequestError(`features.${feature.name}`, "a yeo-johnson feature needs its fitted λ before it can be written as SQL");
      }
      // ψ(x, λ) = ((1 + x)^λ − 1)/λ for x ≥ 0; −((1 − x)^(2−λ) − 1)/(2 − λ) for x < 0 (Yeo & Johnson 2000),
      // with the logarithmic limits at λ = 0 and λ = 2 (features.ts uses the same 1e-200 test).
      const mu = 2 - lambda;
      const positive = Math.abs(lambda) < 1e-200 ? `LN(1 + ${v})` : `(EXP(${doubleLiteral(lambda, dialect)} * LN(1 + ${v})) - 1) / ${doubleLiteral(lambda, dialect)}`;
      const negative = Math.abs(mu) < 1e-200 ? `-LN(1 - ${v})` : `-(EXP(${doubleLiteral(mu, dialect)} * LN(1 - ${v})) - 1) / ${doubleLiteral(mu, dialect)}`;
      return [`CASE WHEN ${v} >= 0 THEN ${positive} ELSE ${negative} END`];
    }
  }
}

/** The common head of both queries: raw values as doubles, segment as text, fraud left out. */
function rawRows(request: SqlSourceRequest, tableSample = ""): { sql: string; label: string | null } {
  const { features, source, labelColumn, segmentBy, dialect } = request;
  if (features.length === 0) throw new SqlRequestError("features", "must list at least one feature");
  if (source.trim() === "") throw new SqlRequestError("source", "must name a table or hold a parenthesised query");
  const select = features.map((f, j) => `CAST(${quoteIdentifier(f.name)} AS ${doubleType(dialect)}) AS v_${j}`);
  select.push(segmentBy === null ? `CAST(NULL AS ${textType(dialect)}) AS seg` : `NULLIF(CAST(${quoteIdentifier(segmentBy)} AS ${textType(dialect)}), '') AS seg`);
  const label = labelColumn === null ? null : `LOWER(TRIM(CAST(${quoteIdentifier(labelColumn)} AS ${textType(dialect)})))`;
  if (label !== null) select.push(`${label} AS label_text`);
  const from = /^\s*\(/.test(source) ? `${source} AS ledger` : `${source}${tableSample}`;
  return { sql: `SELECT ${select.join(",\n       ")}\n  FROM ${from}`, label };
}

/** A row is kept unless labelled fraud (an empty or missing label is "not reviewed" and kept). */
function notFraud(request: SqlSourceRequest): string {
  return request.labelColumn === null ? "" : "\n WHERE label_text IS NULL OR label_text NOT IN ('fraud', '1')";
}

/**
 * One query that computes, per segment value (`segment`; NULL for rows without one, and for every
 * row when there is no segment column): `row_count`,
 * `mean_c` and `covar_i_j` (population covariance, i ≤ j) of the model columns over the rows that
 * pass every domain check, `raw_min_f` / `raw_max_f` of each raw feature, `invalid_f` (rows that
 * break feature f's domain: missing, not finite, or outside what its transform accepts),
 * `lambda_f` for each Yeo–Johnson feature (the λ the query used), and `invalid_labels` (labels
 * other than fraud, legitimate, 1, 0 or empty), and `fraud_rows` (rows labelled fraud, left out of
 * every other figure; the domain checks cover them too, as the CSV reader does).
 * @throws SqlRequestError when a feature lacks its fitted parameter or the source is empty
 * @example momentsQuery({ features: [{ name: "amount", transform: "log", columns: ["amount"] }],
 *   source: "payments", labelColumn: "label", segmentBy: "channel", dialect: "postgres" })
 */
export function momentsQuery(request: SqlSourceRequest): string {
  const { features, segmentBy, dialect } = request;
  if (segmentBy !== null && segmentBy === request.labelColumn) throw new SqlRequestError("segmentBy", "must differ from the label column");
  const { sql: raw, label } = rawRows(request);
  const checks = features.map((f, j) => domainCheck(f, `v_${j}`));
  const allValid = checks.map((c) => `(${c})`).join(" AND ");
  // Transformed columns only for rows that pass every check, so no engine evaluates LN of a bad value.
  const modelExprs: string[] = [];
  features.forEach((f, j) => {
    for (const expr of transformSql(f, `v_${j}`, dialect)) modelExprs.push(`CASE WHEN ok = 1 THEN ${expr} END AS x_${modelExprs.length}`);
  });
  const n = modelExprs.length;
  const passThrough = features.map((_, j) => `v_${j}`);
  const invalidFlags = checks.map((c, j) => `CASE WHEN ${c} THEN 0 ELSE 1 END AS bad_${j}`);
  const labelCheck = label === null ? "0" : "CASE WHEN label_text IS NULL OR label_text IN ('fraud', 'legitimate', '1', '0', '') THEN 0 ELSE 1 END";
  const fraudFlag = label === null ? "0" : "CASE WHEN label_text IN ('fraud', '1') THEN 1 ELSE 0 END";

  const C = MOMENT_COLUMNS;
  // One row per segment value (NULL: rows without one); the pooled moments are the exact merge of
  // these rows (Chan, Golub & LeVeque 1979), done by the reader. A plain GROUP BY (or none) is
  // cheaper on every engine than GROUPING SETS, which aggregates every row twice.
  const aggregates: string[] = [`seg AS ${C.segment}`, `SUM(ok) AS ${C.rows}`];
  for (let c = 0; c < n; c++) aggregates.push(`AVG(x_${c}) AS ${C.mean(c)}`);
  for (let i = 0; i < n; i++) for (let j = i; j < n; j++) aggregates.push(`COVAR_POP(x_${i}, x_${j}) AS ${C.covariance(i, j)}`);
  features.forEach((f, j) => {
    aggregates.push(`MIN(CASE WHEN ok = 1 THEN v_${j} END) AS ${C.min(j)}`, `MAX(CASE WHEN ok = 1 THEN v_${j} END) AS ${C.max(j)}`);
    aggregates.push(`SUM(bad_${j}) AS ${C.invalid(j)}`);
    if (f.transform === "yeo-johnson") aggregates.push(`${doubleLiteral(f.lambda!, dialect)} AS ${C.lambda(j)}`);
  });
  aggregates.push(`SUM(bad_label) AS ${C.invalidLabels}`, `SUM(fraud) AS ${C.fraudRows}`);
  return [
    `-- isodense moments: ${n} model columns (${features.flatMap((f) => columnsOf(f)).join(", ")}); one row per segment value, the pooled model is their merge`,
    `WITH raw_rows AS (\n${raw}\n), checked AS (`,
    `SELECT ${[...passThrough, "seg", ...invalidFlags, `${labelCheck} AS bad_label`, `${fraudFlag} AS fraud`, `CASE WHEN ${fraudFlag} = 0 AND ${allValid} THEN 1 ELSE 0 END AS ok`].join(",\n       ")}`,
    `  FROM raw_rows`,
    `), model_rows AS (`,
    `SELECT seg, ok, ${[...passThrough, ...features.map((_, j) => `bad_${j}`), "bad_label", "fraud", ...modelExprs].join(",\n       ")}`,
    `  FROM checked`,
    `)`,
    `SELECT ${aggregates.join(",\n       ")}`,
    `  FROM model_rows`,
    ...(segmentBy === null ? [] : ["GROUP BY seg", `ORDER BY ${C.segment}`]),
  ].join("\n");
}

/** How many rows a sample query asks for, and how it draws them. */
export interface SampleRequest extends SqlSourceRequest {
  /** Rows to draw (at most). */
  rows: number;
  /** Seed of the draw where the dialect takes one (DuckDB's REPEATABLE, PostgreSQL's setseed). */
  seed: number;
  /** ANSI only: share of rows to draw, in percent (TABLESAMPLE BERNOULLI needs a rate, not a count). */
  percent?: number;
}

/**
 * One query that draws a uniform sample of raw rows (fraud left out) with the feature columns
 * under their own names and the segment column (when any): the input of `fitFromMoments` for
 * transforms with fitted parameters, the cutoff, the drift edges and the robust estimator.
 * DuckDB: reservoir sampling with a seed; PostgreSQL: ORDER BY random() after setseed (a full
 * sort of the source; two statements); ANSI: TABLESAMPLE BERNOULLI at `percent` on the table,
 * capped by FETCH FIRST.
 * @throws SqlRequestError for a bad row count, or an ANSI request without a percent
 */
export function sampleQuery(request: SampleRequest): string {
  const { features, segmentBy, dialect, rows, seed } = request;
  if (!(Number.isSafeInteger(rows) && rows >= 1)) throw new SqlRequestError("rows", `must be a whole number ≥ 1; got ${rows}`);
  const isQuery = /^\s*\(/.test(request.source);
  if (dialect === "ansi" && isQuery) {
    throw new SqlRequestError("source", "the ansi dialect samples a table (TABLESAMPLE applies to a table, not a query): name a table or view");
  }
  const percent = request.percent;
  if (dialect === "ansi" && !(typeof percent === "number" && percent > 0 && percent <= 100)) {
    throw new SqlRequestError("percent", "the ansi dialect samples by share of rows: give a percent in (0, 100]");
  }
  const { sql: raw } = rawRows(request, dialect === "ansi" ? ` TABLESAMPLE BERNOULLI (${percent})` : "");
  const out = features.map((f, j) => `v_${j} AS ${quoteIdentifier(f.name)}`);
  if (segmentBy !== null) out.push(`seg AS ${quoteIdentifier(segmentBy)}`);
  const head = `-- isodense sample: up to ${rows} rows, fraud left out\n`;
  const select = `SELECT ${out.join(", ")}\n  FROM (${raw}) AS raw_rows${notFraud(request)}`;
  switch (dialect) {
    case "duckdb":
      return `${head}${select}\nUSING SAMPLE reservoir(${rows} ROWS) REPEATABLE (${seed})`;
    case "postgres": {
      // setseed takes a value in [-1, 1]; the seed maps into it deterministically.
      const pgSeed = ((seed % 2_000_001) - 1_000_000) / 1_000_000;
      return `${head}SELECT setseed(${pgSeed});\n${select}\nORDER BY random()\nLIMIT ${rows}`;
    }
    case "ansi":
      return `${head}${select}\nFETCH FIRST ${rows} ROWS ONLY`;
  }
}

/** Most segment values a moments result may hold besides the pooled row. */
export const MAX_SQL_SEGMENTS = MAX_SEGMENTS - 1;
