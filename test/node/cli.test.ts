/**
 * End-to-end: the CLI on temporary ledgers of a fictional shop, checking files, exit codes and the
 * messages people read. The main paths run the real process (`node bin/isodense.js …`); the many
 * cases about refusals, bad input and usage run the same `main()` in this process.
 */
import { existsSync } from "node:fs";
import { copyFile, mkdtemp, readdir, readFile, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { parseArtifact } from "../../shared-model/src/artifact";
import { createRandom } from "../../shared-model/src/random";
import { parseCsvChunks } from "../../cli/csv";
import { readReferenceData, referenceDataPath } from "../reference-data/files";
import { type CliRun, runIsodense, spawnIsodense } from "./isodense-cli";

let dir: string;

/** The real process, in the test's folder. */
function isodense(args: string[], cwd = dir): Promise<CliRun> {
  return spawnIsodense(args, cwd);
}

/** The path of a file in the test's folder, for the in-process runs. */
function at(name: string): string {
  return join(dir, name);
}

async function write(name: string, content: string): Promise<string> {
  await writeFile(join(dir, name), content);
  return name;
}

/**
 * A fictional shop's ledger: log-normal amounts, basket sizes, hour of day, channel; every 100th
 * payment is a far-off confirmed fraud, some others are reviewed as legitimate, the rest unlabelled.
 */
function demoLedger(rows: number, seed: number): string {
  const random = createRandom(seed);
  const normal = (): number => Math.sqrt(-2 * Math.log(1 - random.next())) * Math.cos(2 * Math.PI * random.next());
  const lines = ["id,amount,items,hour,channel,label"];
  for (let i = 0; i < rows; i++) {
    const fraud = i % 100 === 50;
    const items = Math.max(1, Math.round(2 + normal()));
    const amount = Math.exp(3.5 + 0.25 * items + 0.4 * normal()) * (fraud ? 25 : 1);
    const hour = (random.next() * 24) % 24;
    const channel = i % 3 === 0 ? "app" : "web";
    const label = fraud ? "fraud" : i % 9 === 0 ? "legitimate" : "";
    const id = i === 7 ? '"ord 7, ""gift"""' : `ord-${i}`;
    lines.push(`${id},${amount.toFixed(2)},${items},${hour.toFixed(2)},${channel},${label}`);
  }
  return lines.join("\r\n") + "\r\n";
}

const SPEC = JSON.stringify({
  features: [
    { name: "amount", transform: "log" },
    { name: "items", transform: "log1p" },
    { name: "hour", transform: "cyclic-hour" },
  ],
});

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-cli-"));
  await write("ledger.csv", demoLedger(3_000, 7));
  await write("spec.json", SPEC);
});

afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

describe("isodense fit and score on a ledger", () => {
  it("fits a model, writes a verified artifact and prints the report, without a progress bar when stderr is piped", async () => {
    const run = await isodense(["fit", "ledger.csv", "--out", "model.json", "--spec", "spec.json", "--segment-by", "channel", "--cutoff-rate", "0.02"]);
    expect(run.stderr).toBe("");
    expect(run.code).toBe(0);
    expect(run.stdout).toContain("rows: 3,000 read from ledger.csv, 2,970 used, 30 excluded as labelled fraud");
    expect(run.stdout).toContain("covariance: full (auto chose full");
    expect(run.stdout).toContain("segments by 'channel'");
    expect(run.stdout).toMatch(/cutoff: flag when d² > [\d.]+ .*expected to flag (1\.9\d|2\.0\d) % of new payments \(asked 2\.00 %\); chosen by the /);
    expect(run.stdout).toMatch(/wrote model m\d{8}-[0-9a-f]{8} to model\.json/);
    const artifact = await parseArtifact(JSON.parse(await readFile(join(dir, "model.json"), "utf8")));
    expect(artifact.columns).toEqual(["amount", "items", "hour.sin", "hour.cos"]);
    expect(Object.keys(artifact.segments).sort()).toEqual(["*", "app", "web"]);
    expect(artifact.training).toEqual({ rowsRead: 3000, rowsUsed: 2970, rowsExcludedAsFraud: 30, source: "ledger.csv" });
    expect(artifact.cutoff.flagRate).toBeCloseTo(0.02, 3);
  });

  it("scores every row, keeps ids as written, and prints precision and recall that match the scores file", async () => {
    const run = await isodense(["score", "model.json", "ledger.csv", "--out", "scores.csv"]);
    expect(run.stderr).toBe("");
    expect(run.code).toBe(0);
    const scores = parseCsvChunks([await readFile(join(dir, "scores.csv"), "utf8")]).map((r) => r.cells);
    expect(scores[0]).toEqual(["id", "logDensity", "mahalanobisSq", "tailProbability", "flagged", "segment", "topReason"]);
    expect(scores).toHaveLength(3_001);
    const ledger = parseCsvChunks([await readFile(join(dir, "ledger.csv"), "utf8")]).map((r) => r.cells);
    expect(scores.slice(1).map((r) => r[0])).toEqual(ledger.slice(1).map((r) => r[0]));
    expect(scores[8][0]).toBe('ord 7, "gift"');
    let tp = 0;
    let fp = 0;
    let fn = 0;
    let tn = 0;
    let flagged = 0;
    scores.slice(1).forEach((row, k) => {
      const [, logDensity, d2, tail, flag, segment, reason] = row;
      expect(Number.isFinite(Number(logDensity))).toBe(true);
      expect(Number(tail)).toBeGreaterThanOrEqual(0);
      expect(Number(tail)).toBeLessThanOrEqual(1);
      expect(["true", "false"]).toContain(flag);
      expect(segment).toBe(ledger[k + 1][4]);
      expect(reason).toMatch(/^(amount|items|hour) [\d.e+-]+ \(expected [\d.e+-]+–[\d.e+-]+\)$/);
      expect(Number(d2)).toBeGreaterThanOrEqual(0);
      const label = ledger[k + 1][5];
      if (flag === "true") flagged++;
      if (label === "fraud") flag === "true" ? tp++ : fn++;
      if (label === "legitimate") flag === "true" ? fp++ : tn++;
    });
    // Every planted fraud is 25 times the usual amount: the model must catch them.
    expect(tp).toBe(30);
    expect(run.stdout).toContain(`TP ${tp}  FP ${fp}  FN ${fn}  TN ${tn}`);
    expect(run.stdout).toContain(`precision ${(tp / (tp + fp)).toFixed(3)}  recall ${(tp / (tp + fn)).toFixed(3)}`);
    expect(run.stdout).toContain(`flagged ${flagged} of 3,000 rows (flag rate ${((flagged / 3000) * 100).toFixed(2)} %`);
    expect(run.stdout).toMatch(/labels in 'label': \d+ labelled \(30 fraud, \d+ legitimate\), [\d,]+ unlabelled/);
  });

  it("numbers the rows when the ledger has no id column", async () => {
    await write("noid.csv", "amount,items,hour,channel\n40,2,10.5,web\n9000,1,3.2,app\n");
    const run = await runIsodense(["score", at("model.json"), at("noid.csv"), "--out", at("noid-scores.csv")]);
    expect(run.code).toBe(0);
    const rows = parseCsvChunks([await readFile(join(dir, "noid-scores.csv"), "utf8")]).map((r) => r.cells);
    expect(rows.slice(1).map((r) => r[0])).toEqual(["1", "2"]);
    expect(rows[2][4]).toBe("true");
    expect(rows[2][6]).toMatch(/^amount 9000 \(expected/);
    expect(run.stdout).not.toContain("precision");
  });

  it("fits iris setosa through the CLI to NumPy's mean and maximum-likelihood covariance", async () => {
    // Fisher's iris (reference-data/iris.csv, SOURCES.md §4); expected values from
    // expected-values.json → iris_setosa (NumPy, covariance divided by m; SOURCES.md §6).
    await copyFile(referenceDataPath("iris.csv"), join(dir, "iris.csv"));
    const expected = JSON.parse(readReferenceData("expected-values.json")).iris_setosa;
    const run = await runIsodense([
      "fit",
      at("iris.csv"),
      "--out",
      at("iris-model.json"),
      "--features",
      "Sepal.Length,Sepal.Width,Petal.Length,Petal.Width",
      "--segment-by",
      "Species",
      "--min-segment-rows",
      "50",
      "--covariance",
      "full",
    ]);
    expect(run.code).toBe(0);
    const artifact = await parseArtifact(JSON.parse(await readFile(join(dir, "iris-model.json"), "utf8")));
    const setosa = artifact.segments.setosa;
    expect(setosa.rows).toBe(50);
    for (let i = 0; i < 4; i++) {
      expect(Math.abs(setosa.mean[i] - expected.mean[i])).toBeLessThan(1e-12);
      for (let j = 0; j < 4; j++) {
        expect(Math.abs(setosa.covariance[i][j] - expected.cov_mle[i][j]) / Math.abs(expected.cov_mle[i][j])).toBeLessThan(1e-10);
      }
    }
  });
});

describe("refusals leave nothing behind", () => {
  it("refuses a planted dependency with exit 1, prints the equation and remedy, and keeps the old file", async () => {
    const random = createRandom(3);
    const lines = ["subtotal,shipping,total"];
    for (let i = 0; i < 400; i++) {
      const subtotal = Math.round(2000 + 4000 * random.next()) / 100;
      const shipping = Math.round(300 + 900 * random.next()) / 100;
      lines.push(`${subtotal},${shipping},${(subtotal * 100 + shipping * 100) / 100}`);
    }
    await write("dependent.csv", lines.join("\n") + "\n");
    await write("kept.json", "previous model\n");
    const run = await isodense(["fit", "dependent.csv", "--out", "kept.json", "--features", "subtotal,shipping,total"]);
    expect(run.code).toBe(1);
    expect(run.stdout).toBe("");
    expect(run.stderr).toContain("fit refused");
    expect(run.stderr).toContain("nothing was written");
    expect(run.stderr).toContain("equation: total ≈ 1.00·subtotal + 1.00·shipping");
    expect(run.stderr).toContain("remedy: drop one of");
    expect(run.stderr).toContain("--estimator shrinkage");
    expect(await readFile(join(dir, "kept.json"), "utf8")).toBe("previous model\n");
    const shrunk = await runIsodense(["fit", at("dependent.csv"), "--out", at("dependent.json"), "--features", "subtotal,shipping,total", "--estimator", "shrinkage"]);
    expect(shrunk.code).toBe(0);
  });

  it("refuses too few rows for a full covariance with exit 1 and writes no file", async () => {
    await write("tiny.csv", "a,b,c\n1,2,3\n2,2,1\n3,1,2\n");
    const run = await runIsodense(["fit", at("tiny.csv"), "--out", at("tiny.json"), "--features", "a,b,c", "--covariance", "full"]);
    expect(run.code).toBe(1);
    expect(run.stderr).toContain("3 rows for 3 columns");
    expect(run.stderr).toContain("remedy: use --covariance diagonal");
    expect(existsSync(join(dir, "tiny.json"))).toBe(false);
  });
});

describe("bad input is named by file, line and column, with exit 2", () => {
  // A message that starts with the file names it as it was given (ledger-bad.csv stands for the
  // case's path); one about the header names the ledger by its file name alone.
  const cases: { title: string; csv: string; spec?: string; message: string }[] = [
    {
      title: "a ragged row",
      csv: "amount,items\n10,1\n11,2\n12,3,4\n",
      message: "ledger-bad.csv line 4 has 3 cells; the header has 2",
    },
    {
      title: "a missing feature column",
      csv: "amt,items\n10,1\n",
      message: "column 'amount' (feature) not found in header of ledger-bad.csv; columns are: amt, items",
    },
    {
      title: "a non-numeric cell",
      csv: "amount,items\n10,1\nabc,2\n",
      message: "ledger-bad.csv line 3, column 'amount': 'abc' is not a number",
    },
    {
      title: "a NaN cell",
      csv: "amount,items\n10,1\n11,NaN\n",
      message: "ledger-bad.csv line 3, column 'items': 'NaN' is not a finite number",
    },
    {
      title: "an Infinity cell",
      csv: "amount,items\nInfinity,1\n",
      message: "ledger-bad.csv line 2, column 'amount': 'Infinity' is not a finite number",
    },
    {
      title: "an empty numeric cell",
      csv: "amount,items\n10,1\n11,\n",
      message: "ledger-bad.csv line 3, column 'items': the cell is empty; a number is required",
    },
    {
      title: "a hexadecimal number",
      csv: "amount,items\n0x10,1\n",
      message: "ledger-bad.csv line 2, column 'amount': '0x10' is not a number",
    },
    {
      title: "an empty file",
      csv: "",
      message: "ledger-bad.csv is empty; a header row naming the columns is required",
    },
    {
      title: "a header without data rows",
      csv: "amount,items\r\n",
      message: "ledger-bad.csv has a header but no data rows",
    },
    {
      title: "duplicate header names",
      csv: "amount,items,amount\n1,2,3\n",
      message: "ledger-bad.csv line 1: column 'amount' appears twice in the header (cells 1 and 3); column names must be unique",
    },
    {
      title: "a label that is not a label",
      csv: "amount,items,label\n10,1,fraud\n11,2,perhaps\n",
      message: "ledger-bad.csv line 3, column 'label': 'perhaps' is not a label; expected fraud, legitimate, 1, 0 or an empty cell",
    },
    {
      title: "a value outside its transform's domain",
      csv: "amount,items\n10,1\n-4,2\n",
      spec: "spec-log.json",
      message: "ledger-bad.csv line 3, column 'amount': must be > 0 for the log transform; got -4",
    },
    {
      title: "an unknown feature in the spec",
      csv: "amount,items\n10,1\n",
      spec: "spec-unknown.json",
      message: "column 'velocity_1h' (feature) not found in header of ledger-bad.csv; columns are: amount, items",
    },
    {
      title: "a quote inside an unquoted cell",
      csv: 'amount,items\n10,1\n12",2\n',
      message: "ledger-bad.csv line 3, column 'cell 1': a quote appears inside an unquoted field",
    },
  ];

  beforeAll(async () => {
    await write(
      "spec-log.json",
      JSON.stringify({
        features: [
          { name: "amount", transform: "log" },
          { name: "items", transform: "none" },
        ],
      }),
    );
    await write(
      "spec-unknown.json",
      JSON.stringify({
        features: [
          { name: "amount", transform: "log" },
          { name: "velocity_1h", transform: "log1p" },
        ],
      }),
    );
  });

  for (const c of cases) {
    it(`fit reports ${c.title} and writes nothing`, async () => {
      const caseDir = await mkdtemp(join(dir, "case-"));
      await writeFile(join(caseDir, "ledger-bad.csv"), c.csv);
      await copyFile(join(dir, "spec-log.json"), join(caseDir, "spec-log.json"));
      await copyFile(join(dir, "spec-unknown.json"), join(caseDir, "spec-unknown.json"));
      const ledger = join(caseDir, "ledger-bad.csv");
      const run = await runIsodense(["fit", ledger, "--out", join(caseDir, "m.json"), ...(c.spec ? ["--spec", join(caseDir, c.spec)] : ["--features", "amount,items"])]);
      expect(run.stderr).toContain(c.message.startsWith("ledger-bad.csv") ? c.message.replace("ledger-bad.csv", ledger) : c.message);
      expect(run.stderr.startsWith("isodense fit: ")).toBe(true);
      expect(run.code).toBe(2);
      expect(existsSync(join(caseDir, "m.json"))).toBe(false);
    });
  }

  it("the real process ends with exit 2 and the message on stderr", async () => {
    await write("ragged.csv", "amount,items\n10,1\n11,2\n12,3,4\n");
    const run = await isodense(["fit", "ragged.csv", "--out", "ragged.json", "--features", "amount,items"]);
    expect(run.code).toBe(2);
    expect(run.stdout).toBe("");
    expect(run.stderr).toBe("isodense fit: ragged.csv line 4 has 3 cells; the header has 2\n");
    expect(existsSync(join(dir, "ragged.json"))).toBe(false);
  });

  it("score reports a bad cell by file, line and column and leaves no scores file", async () => {
    await write("score-bad.csv", "id,amount,items,hour,channel\na,10,1,3,web\nb,12,two,4,web\n");
    const run = await runIsodense(["score", at("model.json"), at("score-bad.csv"), "--out", at("bad-scores.csv")]);
    expect(run.code).toBe(2);
    expect(run.stderr).toContain(`${at("score-bad.csv")} line 3, column 'items': 'two' is not a number`);
    expect(existsSync(join(dir, "bad-scores.csv"))).toBe(false);
    expect((await readdir(dir)).filter((name) => name.includes("bad-scores"))).toEqual([]);
  });

  it("score refuses a ledger without the model's segment column", async () => {
    await write("no-channel.csv", "id,amount,items,hour\na,10,1,3\n");
    const run = await runIsodense(["score", at("model.json"), at("no-channel.csv"), "--out", at("x.csv")]);
    expect(run.code).toBe(2);
    expect(run.stderr).toContain(`column 'channel' (segment column) not found in header of ${at("no-channel.csv")}`);
  });

  it("score refuses a tampered model file and names what was altered", async () => {
    const artifact = JSON.parse(await readFile(join(dir, "model.json"), "utf8"));
    artifact.cutoff.flagRate = 0.5;
    await write("tampered.json", JSON.stringify(artifact));
    const run = await runIsodense(["score", at("tampered.json"), at("ledger.csv"), "--out", at("t.csv")]);
    expect(run.code).toBe(2);
    expect(run.stderr).toContain("isodense score: the model file was refused:");
    expect(run.stderr).toContain("checksum: must equal the SHA-256 of the canonical content");
    expect(existsSync(join(dir, "t.csv"))).toBe(false);
  });

  it("score names a missing model file and a model file that is not JSON", async () => {
    const missing = await runIsodense(["score", at("nope.json"), at("ledger.csv"), "--out", at("t.csv")]);
    expect(missing.code).toBe(2);
    expect(missing.stderr).toContain("nope.json: model file not found");
    await write("not-json.json", "{ model");
    const garbled = await runIsodense(["score", at("not-json.json"), at("ledger.csv"), "--out", at("t.csv")]);
    expect(garbled.code).toBe(2);
    expect(garbled.stderr).toContain("not-json.json is not valid JSON");
  });
});

describe("usage", () => {
  it("lists the commands in isodense --help", async () => {
    const run = await isodense(["--help"]);
    expect(run.code).toBe(0);
    for (const name of ["fit", "score", "tune", "refit", "publish", "demo-ledger"]) expect(run.stdout).toMatch(new RegExp(`^  ${name} `, "m"));
  });

  it("shows each command's options with --help", async () => {
    const run = await runIsodense(["fit", "--help"]);
    expect(run.code).toBe(0);
    expect(run.stdout).toContain("usage: isodense fit [<ledger>] [options]");
    for (const flag of [
      "--out",
      "--features",
      "--spec",
      "--covariance",
      "--estimator",
      "--id-column",
      "--label-column",
      "--segment-by",
      "--cutoff-rate",
      "--seed",
      "--min-segment-rows",
      "--table",
      "--from-sql",
      "--moments",
      "--sample",
    ]) {
      expect(run.stdout).toContain(flag);
    }
    const score = await runIsodense(["help", "score"]);
    expect(score.code).toBe(0);
    expect(score.stdout).toContain("usage: isodense score <model.json> <ledger> [options]");
  });

  it("rejects an unknown command with exit 2 and lists the commands", async () => {
    const run = await runIsodense(["train", at("ledger.csv")]);
    expect(run.code).toBe(2);
    expect(run.stderr).toContain("unknown command 'train'; commands are: derive, fit, score, tune, refit, renew, drift, sql, publish, demo-ledger");
  });

  it("rejects an unknown option by name with exit 2", async () => {
    const run = await runIsodense(["fit", at("ledger.csv"), "--out", at("m.json"), "--features", "amount", "--shape", "full"]);
    expect(run.code).toBe(2);
    expect(run.stderr).toContain("unknown option --shape for 'isodense fit'");
    expect(run.stderr).toContain("run 'isodense fit --help' for usage");
  });

  it("rejects --features together with --spec with exit 2", async () => {
    const run = await runIsodense(["fit", at("ledger.csv"), "--out", at("m.json"), "--features", "amount", "--spec", at("spec.json")]);
    expect(run.code).toBe(2);
    expect(run.stderr).toContain("give either --features or --spec, not both");
  });

  it("rejects a cutoff rate outside (0, 1) and a missing --out with exit 2", async () => {
    const badRate = await runIsodense(["fit", at("ledger.csv"), "--out", at("m.json"), "--features", "amount", "--cutoff-rate=2"]);
    expect(badRate.code).toBe(2);
    expect(badRate.stderr).toContain("option --cutoff-rate must be > 0 and < 1; got 2");
    const noOut = await runIsodense(["fit", at("ledger.csv"), "--features", "amount"]);
    expect(noOut.code).toBe(2);
    expect(noOut.stderr).toContain("option --out is required");
    expect(existsSync(join(dir, "m.json"))).toBe(false);
  });

  it("names a spec that breaks a rule, with the field", async () => {
    await write("spec-bad.json", JSON.stringify({ features: [{ name: "amount", transform: "sqrt" }] }));
    const run = await runIsodense(["fit", at("ledger.csv"), "--out", at("m.json"), "--spec", at("spec-bad.json")]);
    expect(run.code).toBe(2);
    expect(run.stderr).toContain(`--spec ${at("spec-bad.json")}: features[0].transform`);
    expect(run.stderr).toContain("sqrt");
  });
});
