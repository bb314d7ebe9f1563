/**
 * Every command that reads payments reads the same sources as `fit`: a CSV file, a Parquet file,
 * and a table or query of a DuckDB or SQLite database. The same rows from each give the same
 * output, byte for byte where the output is a file; a bad value is named by row and column (by
 * line in a CSV file, as before). Data: the fictional demo shop (invented), derived by `isodense
 * derive`; the copies are written here by DuckDB and by SQLite.
 */
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { fileURLToPath } from "node:url";
import sqliteWasm from "node-sqlite3-wasm";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { ledgerCsvLines } from "../../demo-ledger/generate";
import type { ModelArtifact } from "../../shared-model/src/artifact";
import { captureIO } from "../../cli/capture-io";
import { deriveCommand } from "../../cli/commands/derive";
import { driftCommand } from "../../cli/commands/drift";
import { fitCommand } from "../../cli/commands/fit";
import { refitCommand } from "../../cli/commands/refit";
import { scoreCommand } from "../../cli/commands/score";
import { tuneCommand } from "../../cli/commands/tune";
import { DuckEngine, sqlString } from "../../cli/sources/duckdb-engine";
import { openSourceTable } from "../../cli/sources/table";

const { Database } = sqliteWasm;
const dir = mkdtempSync(join(tmpdir(), "isodense-sources-"));
const p = (name: string): string => join(dir, name);
const demoSpec = fileURLToPath(new URL("../../demo-ledger/spec.json", import.meta.url));
const featureNames = (JSON.parse(readFileSync(demoSpec, "utf8")) as { features: { name: string; transform: string }[] }).features;
type Command = (argv: string[], io: ReturnType<typeof captureIO>["io"]) => Promise<number>;

async function run(command: Command, args: string[], expected = 0): Promise<{ out: string; err: string }> {
  const c = captureIO();
  const code = await command(args, c.io);
  expect(code, c.err()).toBe(expected);
  return { out: c.out(), err: c.err() };
}

/** Writes a Parquet file and a DuckDB database (table `payments`) with the rows of a CSV file, types detected by DuckDB. */
async function duckCopies(csv: string, stem: string): Promise<void> {
  const engine = await DuckEngine.open();
  try {
    await engine.execute(`COPY (SELECT * FROM read_csv(${sqlString(csv)}, header = true)) TO ${sqlString(p(`${stem}.parquet`))} (FORMAT parquet)`);
    await engine.execute(`ATTACH ${sqlString(p(`${stem}.duckdb`))} AS db`);
    await engine.execute(`CREATE TABLE db.payments AS SELECT * FROM read_csv(${sqlString(csv)}, header = true)`);
    await engine.execute("DETACH db");
  } finally {
    engine.close();
  }
}

/** Writes a SQLite database (table `payments`) with the rows of a CSV file: numeric columns REAL, the others TEXT, empty cells NULL. */
async function sqliteCopy(csv: string, path: string, numeric: ReadonlySet<string>, edit?: (row: Record<string, unknown>, index: number) => void): Promise<void> {
  const table = await openSourceTable(csv);
  const db = new Database(path);
  try {
    db.exec(`CREATE TABLE payments (${table.header.map((name) => `"${name}" ${numeric.has(name) ? "REAL" : "TEXT"}`).join(", ")})`);
    db.exec("BEGIN");
    const insert = db.prepare(`INSERT INTO payments VALUES (${table.header.map(() => "?").join(", ")})`);
    let index = 0;
    for await (const record of table.rows) {
      const row: Record<string, unknown> = {};
      table.header.forEach((name, i) => {
        const cell = record.cells[i];
        row[name] = cell === "" ? null : numeric.has(name) ? Number(cell) : cell;
      });
      edit?.(row, index++);
      insert.run(table.header.map((name) => row[name] as string | number | null));
    }
    insert.finalize();
    db.exec("COMMIT");
  } finally {
    db.close();
  }
}

const NUMERIC_RECORD_COLUMNS = new Set(["amount", "basketItems", "shippingFee", "shipDistanceKm"]);
const numericFeatures = new Set(featureNames.map((f) => f.name));

beforeAll(async () => {
  writeFileSync(p("records.csv"), [...ledgerCsvLines({ rows: 1200 })].join("\n") + "\n");
  await run(deriveCommand, [p("records.csv"), "--spec", demoSpec, "--out", p("features.csv")]);
  writeFileSync(p("spec.json"), JSON.stringify({ features: featureNames.map(({ name, transform }) => ({ name, transform })) }));
  await duckCopies(p("records.csv"), "records");
  await duckCopies(p("features.csv"), "features");
  await sqliteCopy(p("records.csv"), p("records.sqlite"), NUMERIC_RECORD_COLUMNS);
  await sqliteCopy(p("features.csv"), p("features.sqlite"), numericFeatures);
  await run(fitCommand, [p("features.csv"), "--spec", p("spec.json"), "--id-column", "paymentId", "--segment-by", "channel", "--out", p("model.json")]);
}, 120_000);

afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** The same feature rows in every kind of source (the DuckDB and SQLite queries change nothing). */
const featureSources = (): string[][] => [
  [p("features.csv")],
  [p("features.parquet")],
  [p("features.duckdb"), "--table", "payments"],
  [p("features.duckdb"), "--from-sql", "SELECT * FROM payments ORDER BY paymentId"],
  [p("features.sqlite"), "--table", "payments"],
  [p("features.sqlite"), "--from-sql", "SELECT * FROM payments WHERE amount > 0 ORDER BY paymentId"],
];

describe("one source reader for every command", () => {
  test("derive gives the same feature rows from payment records in CSV, Parquet, DuckDB and SQLite", async () => {
    const wanted = readFileSync(p("features.csv"), "utf8");
    const sources = [
      [p("records.parquet")],
      [p("records.duckdb"), "--from-sql", "SELECT * FROM payments ORDER BY createdAt, paymentId"],
      [p("records.sqlite"), "--table", "payments"],
    ];
    for (const [i, source] of sources.entries()) {
      await run(deriveCommand, [...source, "--spec", demoSpec, "--out", p(`derived-${i}.csv`)]);
      expect(readFileSync(p(`derived-${i}.csv`), "utf8"), source.join(" ")).toBe(wanted);
    }
  }, 60_000);

  test("fit gives the same model from SQLite (feature columns, or payment records derived on the way) as from CSV", async () => {
    const wanted = JSON.parse(readFileSync(p("model.json"), "utf8")) as ModelArtifact;
    const fits = [
      [p("features.sqlite"), "--table", "payments", "--spec", p("spec.json"), "--id-column", "paymentId"],
      [p("features.sqlite"), "--from-sql", "SELECT * FROM payments", "--spec", p("spec.json"), "--id-column", "paymentId"],
      [p("records.sqlite"), "--table", "payments", "--spec", demoSpec],
    ];
    for (const [i, args] of fits.entries()) {
      await run(fitCommand, [...args, "--segment-by", "channel", "--out", p(`sqlite-model-${i}.json`)]);
      const got = JSON.parse(readFileSync(p(`sqlite-model-${i}.json`), "utf8")) as ModelArtifact;
      expect(got.segments, args.join(" ")).toEqual(wanted.segments);
      expect(got.cutoff).toEqual(wanted.cutoff);
    }
  }, 60_000);

  test("score writes the same scores file and metrics from every kind of source", async () => {
    const outputs = new Set<string>();
    const reports = new Set<string>();
    for (const [i, source] of featureSources().entries()) {
      const { out } = await run(scoreCommand, [p("model.json"), ...source, "--id-column", "paymentId", "--out", p(`scores-${i}.csv`)]);
      outputs.add(readFileSync(p(`scores-${i}.csv`), "utf8"));
      reports.add(out.replace(/wrote .*$/m, ""));
    }
    expect(outputs.size).toBe(1);
    expect(reports.size).toBe(1);
    expect([...reports][0]).toContain("precision");
  }, 60_000);

  test("drift reports the same table from every kind of source", async () => {
    const reports = new Set<string>();
    for (const [i, source] of featureSources().entries()) {
      await run(driftCommand, [p("model.json"), ...source, "--out", p(`drift-${i}.json`)]);
      const report = JSON.parse(readFileSync(p(`drift-${i}.json`), "utf8")) as Record<string, unknown>;
      delete report.ledger;
      reports.add(JSON.stringify(report));
    }
    expect(reports.size).toBe(1);
  }, 60_000);

  test("tune chooses the same cutoff from labels in CSV, Parquet, DuckDB and SQLite", async () => {
    const cutoffs = new Set<string>();
    for (const [i, source] of featureSources().entries()) {
      const args = [...source, "--model", p("model.json"), "--id-column", "paymentId", "--label-column", "label", "--out", p(`tuned-${i}.json`)];
      await run(tuneCommand, args);
      cutoffs.add(JSON.stringify((JSON.parse(readFileSync(p(`tuned-${i}.json`), "utf8")) as ModelArtifact).cutoff));
    }
    expect(cutoffs.size).toBe(1);
  }, 60_000);

  test("refit fits the same candidate from a ledger in every kind of source, with labels in CSV or Parquet", async () => {
    const candidates = new Set<string>();
    for (const [i, source] of featureSources().entries()) {
      const labels = i % 2 === 0 ? p("features.csv") : p("features.parquet");
      const args = [...source, "--labels", labels, "--labels-id-column", "paymentId", "--labels-label-column", "label", "--model", p("model.json")];
      await run(refitCommand, [...args, "--id-column", "paymentId", "--out", p(`candidate-${i}.json`)]);
      candidates.add(JSON.stringify((JSON.parse(readFileSync(p(`candidate-${i}.json`), "utf8")) as ModelArtifact).segments));
    }
    expect(candidates.size).toBe(1);
  }, 120_000);
});

describe("bad values are named by row and column", () => {
  test("a value outside its transform's domain in Parquet and SQLite names the row and column; in CSV the line, as before", async () => {
    const engine = await DuckEngine.open();
    try {
      // Row 3 gets a negative amount, which the log transform refuses.
      const select = `SELECT * REPLACE (CASE WHEN paymentId = 'pay-000003' THEN -5 ELSE amount END AS amount) FROM read_csv(${sqlString(p("features.csv"))}, header = true)`;
      await engine.execute(`COPY (${select}) TO ${sqlString(p("bad.parquet"))} (FORMAT parquet)`);
      await engine.execute(`COPY (${select}) TO ${sqlString(p("bad.csv"))} (FORMAT csv, HEADER)`);
    } finally {
      engine.close();
    }
    await sqliteCopy(p("features.csv"), p("bad.sqlite"), numericFeatures, (row, index) => {
      if (index === 2) row.amount = -5;
    });
    const rule = "must be > 0 for the log transform; got -5";
    const cases: [Command, string[], string][] = [
      [scoreCommand, [p("model.json"), p("bad.parquet"), "--out", p("bad-scores.csv")], "bad.parquet row 3, column 'amount'"],
      [driftCommand, [p("model.json"), p("bad.sqlite"), "--table", "payments"], "bad.sqlite table payments row 3, column 'amount'"],
      [scoreCommand, [p("model.json"), p("bad.csv"), "--out", p("bad-scores.csv")], `${p("bad.csv")} line 4, column 'amount'`],
      [fitCommand, [p("bad.parquet"), "--spec", p("spec.json"), "--out", p("bad-model.json")], "bad.parquet row 3, column 'amount'"],
      [fitCommand, [p("bad.sqlite"), "--from-sql", "SELECT * FROM payments", "--spec", p("spec.json"), "--out", p("bad-model.json")], "bad.sqlite (query) row 3, column 'amount'"],
    ];
    for (const [command, args, where] of cases) {
      const { err } = await run(command, args, 2);
      expect(err, args.join(" ")).toContain(where);
      expect(err).toContain(`${where}: ${rule}`);
    }
  }, 60_000);

  test("text where a number belongs and a bad label in SQLite are named by row and column", async () => {
    await sqliteCopy(p("features.csv"), p("text.sqlite"), numericFeatures, (row, index) => {
      if (index === 4) row.basketItems = "four";
      if (index === 6) row.label = "maybe";
    });
    const score = await run(scoreCommand, [p("model.json"), p("text.sqlite"), "--table", "payments", "--out", p("text-scores.csv")], 2);
    expect(score.err).toContain("text.sqlite table payments row 5, column 'basketItems': 'four' is not a number");
    const labelsOnly = "SELECT * FROM payments WHERE basketItems <> 'four'";
    const tune = await run(
      tuneCommand,
      [p("text.sqlite"), "--from-sql", labelsOnly, "--model", p("model.json"), "--id-column", "paymentId", "--label-column", "label", "--out", p("t.json")],
      2,
    );
    expect(tune.err).toContain("text.sqlite (query) row 6, column 'label': 'maybe' is not a label");
  }, 60_000);

  test("a missing column, a missing table, a locked database and a query that fails name the source", async () => {
    const missing = await run(scoreCommand, [p("model.json"), p("features.sqlite"), "--from-sql", "SELECT paymentId, amount FROM payments", "--out", p("m.csv")], 2);
    expect(missing.err).toContain("column 'basketItems'");
    expect(missing.err).toContain("paymentId, amount");
    const noTable = await run(driftCommand, [p("model.json"), p("features.sqlite"), "--table", "nowhere"], 2);
    expect(noTable.err).toContain("features.sqlite table nowhere: no such table: nowhere");
    mkdirSync(`${p("features.sqlite")}.lock`);
    try {
      const locked = await run(driftCommand, [p("model.json"), p("features.sqlite"), "--table", "payments"], 2);
      expect(locked.err).toContain(`database is locked (the SQLite reader locks the file with the folder ${p("features.sqlite")}.lock;`);
    } finally {
      rmSync(`${p("features.sqlite")}.lock`, { recursive: true });
    }
    const badQuery = await run(deriveCommand, [p("records.duckdb"), "--from-sql", "SELECT nothing FROM payments", "--spec", demoSpec, "--out", p("d.csv")], 2);
    expect(badQuery.err).toContain("records.duckdb (query):");
    const csvTable = await run(scoreCommand, [p("model.json"), p("features.csv"), "--table", "payments", "--out", p("m.csv")], 2);
    expect(csvTable.err).toContain("--table reads a DuckDB or SQLite database");
  }, 60_000);
});
