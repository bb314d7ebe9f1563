/**
 * Portability of the fit past one machine: the queries of `isodense sql` run on two independent
 * engines, DuckDB (embedded) and a real PostgreSQL server started here, and `isodense fit
 * --moments` finishes the fit from their results. Each model must agree with the streaming fit of
 * the same rows (`fitModel`, Welford's one pass) to 1e-9 relative in every segment's mean and
 * covariance and in the cutoff. The same holds for `isodense fit` reading CSV, Parquet and a
 * DuckDB database through DuckDB. Data: the fictional demo shop (invented), its nine features
 * derived by isodense derive, with every transform
 * kind (none, log, log1p, Yeo–Johnson, cyclic hour).
 */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { fileURLToPath } from "node:url";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { ledgerCsvLines } from "../../demo-ledger/generate";
import { parseFeatureSpec } from "../../shared-model/src/features";
import { fitModel, type FitOptions } from "../../shared-model/src/fit";
import type { ModelArtifact } from "../../shared-model/src/artifact";
import { relativeErrors } from "../../scripts/shard-moments";
import { captureIO } from "../../cli/capture-io";
import { deriveCommand } from "../../cli/commands/derive";
import { fitCommand } from "../../cli/commands/fit";
import { sqlCommand } from "../../cli/commands/sql";
import { formatCsvRow } from "../../cli/csv";
import { LedgerRowSource } from "../../cli/ledger";
import { DuckEngine, sqlString } from "../../cli/sources/duckdb-engine";
import { postgresBinaries, startTempPostgres, type TempPostgres } from "./temp-postgres";

const ROWS = 4000;
const dir = mkdtempSync(join(tmpdir(), "isodense-sql-"));
const ledgerPath = join(dir, "ledger.csv");
const specPath = join(dir, "spec.json");
const recordsPath = join(dir, "records.csv");
const demoSpecPath = new URL("../../demo-ledger/spec.json", import.meta.url);
const demoSpec = JSON.parse(readFileSync(demoSpecPath, "utf8")) as { features: { name: string; transform: string }[] };
// The derived feature columns with their transforms; one column as it is, so every transform kind is written as SQL.
const spec = { features: demoSpec.features.map(({ name, transform }) => ({ name, transform: name === "paymentsLast24h" ? "none" : transform })) };
const features = parseFeatureSpec(spec);
const fitArgs = ["--spec", specPath, "--segment-by", "channel", "--seed", "3"];
let reference: ModelArtifact;

beforeAll(async () => {
  writeFileSync(recordsPath, [...ledgerCsvLines({ rows: ROWS })].join("\n") + "\n");
  await cli(deriveCommand, [recordsPath, "--spec", fileURLToPath(demoSpecPath), "--out", ledgerPath]);
  writeFileSync(specPath, JSON.stringify(spec));
  const source = new LedgerRowSource(ledgerPath, { features, labelColumn: "label", idColumn: "paymentId", segmentColumn: "channel" });
  const options: FitOptions = {
    features,
    shape: "full",
    estimator: "classical",
    segmentBy: "channel",
    cutoffRate: 0.01,
    seed: 3,
    get rowsExcludedAsFraud() {
      return source.counts.rowsExcludedAsFraud;
    },
  };
  reference = (await fitModel(source, options)).artifact;
}, 60_000);

afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** Every segment's mean and covariance, and the cutoff, within 1e-9 relative of the streaming fit. */
function expectSameModel(model: ModelArtifact): void {
  expect(Object.keys(model.segments).sort()).toEqual(Object.keys(reference.segments).sort());
  for (const [key, wanted] of Object.entries(reference.segments)) {
    const got = model.segments[key];
    expect(got.rows, `rows of ${key}`).toBe(wanted.rows);
    const summary = (s: typeof got) => ({ count: s.rows, mean: Float64Array.from(s.mean), covariance: Float64Array.from(s.covariance.flat()) });
    const errors = relativeErrors(summary(wanted), summary(got));
    expect(errors.meanRelativeError, `mean of ${key}`).toBeLessThanOrEqual(1e-9);
    expect(errors.covarianceRelativeError, `covariance of ${key}`).toBeLessThanOrEqual(1e-9);
  }
  expect(Math.abs(model.cutoff.mahalanobisSq - reference.cutoff.mahalanobisSq) / reference.cutoff.mahalanobisSq).toBeLessThanOrEqual(1e-9);
  expect(model.training.rowsExcludedAsFraud).toBe(reference.training.rowsExcludedAsFraud);
  model.features.forEach((f, j) => {
    if (f.lambda !== undefined) expect(Math.abs(f.lambda - reference.features[j].lambda!)).toBeLessThanOrEqual(1e-9);
  });
}

async function cli(command: typeof fitCommand, args: string[]): Promise<string> {
  const c = captureIO();
  const code = await command(args, c.io);
  expect(code, c.err()).toBe(0);
  return c.out();
}

function writeCsv(path: string, records: Record<string, unknown>[]): void {
  const header = Object.keys(records[0]);
  const lines = [header.join(","), ...records.map((r) => formatCsvRow(header.map((h) => (r[h] === null || r[h] === undefined ? "" : String(r[h])))))];
  writeFileSync(path, lines.join("\n") + "\n");
}

/** sql sample → engine → sql moments → engine → fit --moments, as a user would run them. */
async function roundTrip(dialect: string, run: (sql: string) => Promise<Record<string, unknown>[]>, name: string): Promise<ModelArtifact> {
  const common = ["--spec", specPath, "--source", "payments", "--dialect", dialect, "--label-column", "label", "--segment-by", "channel"];
  const samplePath = join(dir, `${name}-sample.csv`);
  const momentsPath = join(dir, `${name}-moments.csv`);
  writeCsv(samplePath, await run(await cli(sqlCommand, ["sample", ...common, "--seed", "3"])));
  writeCsv(momentsPath, await run(await cli(sqlCommand, ["moments", ...common, "--sample", samplePath])));
  const out = join(dir, `${name}-model.json`);
  const report = await cli(fitCommand, ["--moments", momentsPath, "--sample", samplePath, ...fitArgs, "--out", out]);
  expect(report).toContain(`moments of all ${reference.training.rowsUsed.toLocaleString("en")} rows from SQL`);
  return JSON.parse(readFileSync(out, "utf8")) as ModelArtifact;
}

describe("isodense sql on DuckDB", () => {
  test("the moments and sample queries round-trip through fit --moments to the streaming fit", async () => {
    const engine = await DuckEngine.open();
    try {
      await engine.execute(`CREATE TABLE payments AS SELECT * FROM read_csv(${sqlString(ledgerPath)}, header = true)`);
      const run = async (sql: string) => engine.rows(sql.replace(/;\s*$/, ""));
      expectSameModel(await roundTrip("duckdb", run, "duckdb"));
    } finally {
      engine.close();
    }
  }, 60_000);

  test("fit --moments refuses a result that counted rows outside a feature's domain, naming the feature and the rule", async () => {
    const engine = await DuckEngine.open();
    const momentsPath = join(dir, "bad-moments.csv");
    const samplePath = join(dir, "duckdb-sample.csv");
    try {
      await engine.execute(
        `CREATE TABLE payments AS SELECT * REPLACE (CASE WHEN paymentId = 'pay-000007' THEN -3 ELSE amount END AS amount) FROM read_csv(${sqlString(ledgerPath)}, header = true)`,
      );
      const sql = await cli(sqlCommand, [
        "moments",
        "--spec",
        specPath,
        "--source",
        "payments",
        "--dialect",
        "duckdb",
        "--label-column",
        "label",
        "--segment-by",
        "channel",
        "--sample",
        samplePath,
      ]);
      writeCsv(momentsPath, await engine.rows(sql.replace(/;\s*$/, "")));
    } finally {
      engine.close();
    }
    const c = captureIO();
    const code = await fitCommand(["--moments", momentsPath, "--sample", samplePath, ...fitArgs, "--out", join(dir, "never.json")], c.io);
    expect(code).toBe(2);
    expect(c.err()).toContain("1 rows of amount are not a finite number > 0 (log transform)");
  }, 60_000);

  test("fit reads the ledger through DuckDB as CSV, Parquet and a DuckDB table or query, to the streaming fit", async () => {
    const parquet = join(dir, "ledger.parquet");
    const database = join(dir, "ledger.duckdb");
    const engine = await DuckEngine.open();
    try {
      await engine.execute(`COPY (SELECT * FROM read_csv(${sqlString(ledgerPath)}, header = true)) TO ${sqlString(parquet)} (FORMAT parquet)`);
      await engine.execute(`ATTACH ${sqlString(database)} AS db`);
      await engine.execute(`CREATE TABLE db.payments AS SELECT * FROM read_csv(${sqlString(ledgerPath)}, header = true)`);
      await engine.execute("DETACH db");
    } finally {
      engine.close();
    }
    const sources = [[ledgerPath], [parquet], [database, "--table", "payments"], [database, "--from-sql", "SELECT * FROM payments ORDER BY paymentId"]];
    for (const source of sources) {
      const out = join(dir, "local-model.json");
      await cli(fitCommand, [...source, ...fitArgs, "--label-column", "label", "--id-column", "paymentId", "--covariance", "full", "--out", out]);
      expectSameModel(JSON.parse(readFileSync(out, "utf8")) as ModelArtifact);
    }
  }, 120_000);
});

const binaries = postgresBinaries();
if (binaries === null) {
  console.warn("PostgreSQL is not installed (apt-get install -y postgresql): the PostgreSQL round trip is skipped");
}

describe.skipIf(binaries === null)("isodense sql on a PostgreSQL server", () => {
  let server: TempPostgres;
  beforeAll(async () => {
    server = await startTempPostgres();
    const [headerLine, ...lines] = readFileSync(ledgerPath, "utf8").trim().split("\n");
    const header = headerLine.split(",");
    const numeric = new Set([...features.map((f) => f.name)]);
    await server.client.query(`CREATE TABLE payments (${header.map((h) => `"${h}" ${numeric.has(h) ? "DOUBLE PRECISION" : "TEXT"}`).join(", ")})`);
    // The demo ledger's cells hold no commas or quotes, so a split reads them.
    for (let start = 0; start < lines.length; start += 500) {
      const batch = lines.slice(start, start + 500).map((line) => line.split(","));
      const params: (string | null)[] = [];
      const tuples = batch.map((cells) => `(${cells.map((cell) => `$${params.push(cell === "" ? null : cell)}`).join(", ")})`);
      await server.client.query(`INSERT INTO payments VALUES ${tuples.join(", ")}`, params);
    }
  }, 120_000);
  afterAll(async () => server?.stop());

  test("the moments and sample queries round-trip through fit --moments to the streaming fit", async () => {
    const run = async (sql: string) => {
      const result = await server.client.query(sql);
      // The sample query sets the seed first: the rows are in the last statement's result.
      return (Array.isArray(result) ? result[result.length - 1] : result).rows as Record<string, unknown>[];
    };
    expectSameModel(await roundTrip("postgres", run, "postgres"));
  }, 60_000);
});
