/**
 * The loop from decisions to a better model, through the CLI's commands (`main()`, in this process;
 * cli.test.ts runs the real process) on the fictional shop's demo ledger: fit → score → a labelled
 * set built the way the review export writes it (outcomes of the flagged payments, plus a seeded
 * audit sample of the others with weight 1/rate) → tune with each objective → refit without the
 * confirmed fraud. Every model written must verify with parseArtifact.
 */
import { mkdtemp, readFile, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { parseArtifact, type ModelArtifact } from "../../shared-model/src/artifact";
import { transformInto } from "../../shared-model/src/features";
import { createRandom } from "../../shared-model/src/random";
import { compileModel, Scorer } from "../../shared-model/src/score";
import { type CliRun, repoRoot, runIsodense } from "./isodense-cli";

const spec = join(repoRoot, "demo-ledger", "spec.json");

let dir: string;

/** Runs an isodense command with file names taken in the test's folder. */
function isodense(args: string[]): Promise<CliRun> {
  const files = /\.(csv|json)$/;
  return runIsodense(args.map((arg) => (files.test(arg) && !arg.startsWith("/") ? join(dir, arg) : arg)));
}

async function model(name: string): Promise<ModelArtifact> {
  return parseArtifact(JSON.parse(await readFile(join(dir, name), "utf8")));
}

/** Splits a demo-ledger CSV (its writer never quotes a cell) into a header and rows. */
function table(text: string): { header: string[]; rows: string[][] } {
  const lines = text.trimEnd().split("\n");
  return { header: lines[0].split(","), rows: lines.slice(1).map((l) => l.split(",")) };
}

const AUDIT_RATE = 0.1;
/** The demo's eight weeks: 60,000 payments / 56 days. */
const DAILY_PAYMENTS = 1071;

let ledger: { header: string[]; rows: string[][] };
/** The ledger's features as the export carries them: derived from the records (isodense derive). */
let derived: { header: string[]; rows: string[][] };
let live: ModelArtifact;
let confirmedFraud: Set<string>;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-loop-"));
  const generated = await isodense(["demo-ledger", "--out", "ledger.csv"]);
  expect(generated.code, generated.stderr).toBe(0);
  ledger = table(await readFile(join(dir, "ledger.csv"), "utf8"));
  const derive = await isodense(["derive", "ledger.csv", "--spec", spec, "--out", "features.csv"]);
  expect(derive.code, derive.stderr).toBe(0);
  derived = table(await readFile(join(dir, "features.csv"), "utf8"));
}, 120_000);

afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

describe("the loop on the demo ledger through the CLI", () => {
  it("fits the live model and scores the ledger with it", async () => {
    const fit = await isodense(["fit", "ledger.csv", "--out", "live.json", "--spec", spec, "--segment-by", "channel", "--id-column", "paymentId"]);
    expect(fit.stderr).toBe("");
    expect(fit.code).toBe(0);
    live = await model("live.json");
    const score = await isodense(["score", "live.json", "ledger.csv", "--out", "scores.csv", "--id-column", "paymentId"]);
    expect(score.stderr).toBe("");
    expect(score.code).toBe(0);
    // Every pass of the fit and the score derives the features from the records again.
  }, 180_000);

  it("builds the labelled set as the review export writes it: flags with weight 1, an audit sample with weight 1/rate", async () => {
    const scores = table(await readFile(join(dir, "scores.csv"), "utf8"));
    const col = (name: string): number => ledger.header.indexOf(name);
    const sc = (name: string): number => scores.header.indexOf(name);
    const featureNames = live.features.map((f) => f.name);
    const lines = [
      ["id", ...featureNames, "model_version", "segment", "selection", "log_density", "mahalanobis_sq", "tail_probability", "outcome", "weight", "decided_at", "decided_by"].join(
        ",",
      ),
    ];
    const draw = createRandom(20261208);
    confirmedFraud = new Set();
    let flags = 0;
    let audits = 0;
    ledger.rows.forEach((row, i) => {
      const s = scores.rows[i];
      expect(s[sc("id")]).toBe(row[col("paymentId")]);
      const flagged = s[sc("flagged")] === "true";
      // Every flag is decided; of the others, an audit sample at AUDIT_RATE (a seeded draw).
      const audited = !flagged && draw.next() < AUDIT_RATE;
      if (!flagged && !audited) return;
      flagged ? flags++ : audits++;
      const outcome = row[col("label")];
      if (outcome === "fraud") confirmedFraud.add(row[col("paymentId")]);
      lines.push(
        [
          row[col("paymentId")],
          ...featureNames.map((f) => derived.rows[i][derived.header.indexOf(f)]),
          live.version,
          s[sc("segment")],
          flagged ? "flag" : "audit",
          s[sc("logDensity")],
          s[sc("mahalanobisSq")],
          s[sc("tailProbability")],
          outcome,
          flagged ? 1 : 1 / AUDIT_RATE,
          "2026-11-27T10:00:00.000Z",
          "analyst-3",
        ].join(","),
      );
    });
    await writeFile(join(dir, "labels.csv"), lines.join("\n") + "\n");
    expect(flags).toBeGreaterThan(300);
    expect(audits).toBeGreaterThan(5000);
    expect(confirmedFraud.size).toBeGreaterThan(300);
  });

  it("tunes the cutoff with each objective and writes new versions that verify", async () => {
    const runs = await Promise.all([
      isodense(["tune", "labels.csv", "--model", "live.json", "--out", "tuned-f1.json"]),
      isodense([
        "tune",
        "labels.csv",
        "--model",
        "live.json",
        "--out",
        "tuned-capacity.json",
        "--objective",
        "capacity",
        "--capacity",
        "10/day",
        "--daily-payments",
        String(DAILY_PAYMENTS),
      ]),
      isodense([
        "tune",
        "labels.csv",
        "--model",
        "live.json",
        "--out",
        "tuned-cost.json",
        "--objective",
        "cost",
        "--costs",
        "review=3,fraud=120,friction=2",
        "--daily-payments",
        String(DAILY_PAYMENTS),
        "--scored-payments",
        "60000",
      ]),
    ]);
    for (const run of runs) {
      expect(run.stderr).toBe("");
      expect(run.code).toBe(0);
      expect(run.stdout).toMatch(/PR-AUC \(average precision, step-wise\): 0\.\d+/);
      expect(run.stdout).toMatch(/estimates for all traffic at the chosen cutoff \(Horvitz–Thompson, 95 % intervals/);
    }
    const [f1, capacity, cost] = await Promise.all([model("tuned-f1.json"), model("tuned-capacity.json"), model("tuned-cost.json")]);
    expect([f1.cutoff.basis, capacity.cutoff.basis, cost.cutoff.basis]).toEqual(["f1", "capacity", "cost"]);
    for (const tuned of [f1, capacity, cost]) {
      expect(tuned.version).not.toBe(live.version);
      expect(tuned.segments).toEqual(live.segments);
      expect(tuned.features).toEqual(live.features);
    }
    // Capacity: the expected flags per day at the new cutoff fit the ten reviews a day.
    expect(capacity.cutoff.flagRate! * DAILY_PAYMENTS).toBeLessThanOrEqual(10);
    expect(capacity.cutoff.mahalanobisSq).toBeGreaterThan(live.cutoff.mahalanobisSq);
    console.log(
      `tuned cutoffs on the demo (live d² > ${live.cutoff.mahalanobisSq.toFixed(2)}): ` +
        `f1 ${f1.cutoff.mahalanobisSq.toFixed(2)}, capacity ${capacity.cutoff.mahalanobisSq.toFixed(2)}, cost ${cost.cutoff.mahalanobisSq.toFixed(2)}`,
    );
    console.log(runs[0].stdout);
  }, 60_000);

  it("refits a candidate without the confirmed fraud, and the candidate verifies", async () => {
    // The ledger export of the training window carries no ground truth: outcomes come from the labels.
    const keep = ledger.header.map((_, j) => j).filter((j) => ledger.header[j] !== "label" && ledger.header[j] !== "fraudPattern");
    await writeFile(join(dir, "window.csv"), [keep.map((j) => ledger.header[j]).join(","), ...ledger.rows.map((r) => keep.map((j) => r[j]).join(","))].join("\n") + "\n");
    const run = await isodense(["refit", "window.csv", "--labels", "labels.csv", "--model", "tuned-f1.json", "--out", "candidate.json", "--id-column", "paymentId"]);
    expect(run.stderr).toBe("");
    expect(run.code).toBe(0);
    console.log(run.stdout);
    const candidate = await model("candidate.json");
    const tuned = await model("tuned-f1.json");
    expect(candidate.training).toEqual({
      rowsRead: 60_000,
      rowsUsed: 60_000 - confirmedFraud.size,
      rowsExcludedAsFraud: confirmedFraud.size,
      source: "window.csv",
    });
    expect(candidate.features.map((f) => [f.name, f.transform])).toEqual(tuned.features.map((f) => [f.name, f.transform]));
    expect([candidate.covarianceShape, candidate.estimator, candidate.segmentBy]).toEqual([tuned.covarianceShape, tuned.estimator, tuned.segmentBy]);
    // The tuned cutoff records the share of all traffic it flags; the candidate matches the share
    // of its own (normal) training rows that the tuned cutoff flags, recomputed here.
    const scorer = new Scorer(compileModel(tuned));
    const segmentOf = ledger.header.indexOf("channel");
    let trainingFlagged = 0;
    for (const [i, row] of ledger.rows.entries()) {
      if (confirmedFraud.has(row[ledger.header.indexOf("paymentId")])) continue;
      const raw = tuned.features.map((f) => Number(derived.rows[i][derived.header.indexOf(f.name)]));
      if (scorer.score(raw, row[segmentOf]).flagged) trainingFlagged++;
    }
    expect(Math.abs(candidate.cutoff.flagRate! - trainingFlagged / candidate.training.rowsUsed)).toBeLessThanOrEqual(2 / candidate.training.rowsUsed);
    expect(Math.abs(candidate.cutoff.mahalanobisSq / tuned.cutoff.mahalanobisSq - 1)).toBeLessThan(0.1);
    expect(run.stdout).toContain(`left out ${confirmedFraud.size.toLocaleString("en-US")} confirmed fraud (labels) and 0 labelled fraud (ledger)`);
    expect(run.stdout).toMatch(/PR-AUC \(average precision\) +0\.\d+ +0\.\d+/);
    expect(run.stdout).toMatch(/flag overlap on the ledger \(Jaccard, own cutoffs\): [\d.]+/);

    // The candidate's pooled mean is the mean of the ledger without the confirmed fraud, in the
    // candidate's own model units (its fitted transforms).
    const col = (name: string): number => ledger.header.indexOf(name);
    const n = candidate.columns.length;
    const sum = new Float64Array(n);
    const x = new Float64Array(n);
    let used = 0;
    for (const [i, row] of ledger.rows.entries()) {
      if (confirmedFraud.has(row[col("paymentId")])) continue;
      transformInto(
        candidate.features,
        candidate.features.map((f) => Number(derived.rows[i][derived.header.indexOf(f.name)])),
        x,
      );
      for (let j = 0; j < n; j++) sum[j] += x[j];
      used++;
    }
    expect(used).toBe(candidate.training.rowsUsed);
    candidate.segments["*"].mean.forEach((m, j) => {
      expect(Math.abs(m - sum[j] / used), candidate.columns[j]).toBeLessThan(1e-9 * Math.max(1, Math.abs(m)));
    });
  }, 180_000);
});
