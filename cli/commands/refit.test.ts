/**
 * `isodense refit` in-process on an invented ledger in which 30 payments were later confirmed as
 * fraud by the analysts (their ledger label is still empty), 10 carry a fraud label in the ledger
 * itself, and 20 flags were dismissed. The candidate's training row count and mean prove what was
 * left out.
 */
import { mkdtemp, readFile, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { parseArtifact, type ModelArtifact } from "../../shared-model/src/artifact";
import { createRandom } from "../../shared-model/src/random";
import { compileModel, Scorer } from "../../shared-model/src/score";
import { retuneArtifact } from "../../shared-model/src/tuning";
import { fitCommand } from "./fit";
import { jaccard, refitCommand } from "./refit";
import { captureIO } from "../capture-io";

interface Row {
  id: string;
  amount: number;
  items: number;
  channel: string;
  ledgerLabel: "" | "fraud" | "legitimate";
  kind: "normal" | "confirmed" | "ledger-fraud";
}

let dir: string;
let rows: Row[];
let live: ModelArtifact;

const p = (name: string): string => join(dir, name);

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-refit-"));
  const random = createRandom(77);
  const normal = (): number => Math.sqrt(-2 * Math.log(1 - random.next())) * Math.cos(2 * Math.PI * random.next());
  rows = [];
  for (let i = 0; i < 3040; i++) {
    const kind: Row["kind"] = i % 100 === 7 && i < 3000 ? "confirmed" : i >= 3030 ? "ledger-fraud" : "normal";
    const items = Math.max(1, Math.round(2 + normal()));
    const amount = Number((Math.exp(3.4 + 0.3 * items + 0.35 * normal()) * (kind === "normal" ? 1 : 25)).toFixed(2));
    rows.push({
      id: `ord-${i}`,
      amount,
      items,
      channel: i % 3 === 0 ? "app" : "web",
      ledgerLabel: kind === "ledger-fraud" ? "fraud" : i % 50 === 0 ? "legitimate" : "",
      kind,
    });
  }
  // 30 confirmed (i % 100 = 7 below 3000) + 10 ledger fraud: 3,000 normal rows remain.
  expect(rows.filter((r) => r.kind === "normal")).toHaveLength(3000);
  await writeFile(p("ledger.csv"), ["id,amount,items,channel,label", ...rows.map((r) => `${r.id},${r.amount},${r.items},${r.channel},${r.ledgerLabel}`)].join("\n") + "\n");
  await writeFile(
    p("spec.json"),
    JSON.stringify({
      features: [
        { name: "amount", transform: "log" },
        { name: "items", transform: "log1p" },
      ],
    }),
  );
  // The live model was fitted before the reviews: the 30 later-confirmed frauds were in its training data.
  const fit = captureIO();
  expect(await fitCommand([p("ledger.csv"), "--out", p("live.json"), "--spec", p("spec.json"), "--segment-by", "channel", "--cutoff-rate", "0.02"], fit.io)).toBe(0);
  live = await parseArtifact(JSON.parse(await readFile(p("live.json"), "utf8")));
  // The review export: the 30 confirmed frauds, 20 dismissed flags, 100 audit draws at 5 %, and two
  // confirmed frauds from after the training window (not in the ledger).
  const normals = rows.filter((r) => r.kind === "normal");
  const line = (r: Pick<Row, "id" | "amount" | "items" | "channel">, outcome: string, weight: number): string => `${r.id},${r.amount},${r.items},${r.channel},${outcome},${weight}`;
  await writeFile(
    p("labels.csv"),
    [
      "transactionId,amount,items,channel,outcome,weight",
      ...rows.filter((r) => r.kind === "confirmed").map((r) => line(r, "fraud", 1)),
      ...normals.slice(0, 20).map((r) => line(r, "legitimate", 1)),
      ...normals.slice(1000, 1100).map((r) => line(r, "legitimate", 20)),
      line({ id: "ord-9001", amount: 4100, items: 1, channel: "web" }, "fraud", 1),
      line({ id: "ord-9002", amount: 3900, items: 1, channel: "app" }, "fraud", 1),
    ].join("\n") + "\n",
  );
});

afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

describe("isodense refit", () => {
  it("leaves the confirmed fraud out of the candidate, as its training row count and mean prove", async () => {
    const c = captureIO();
    const code = await refitCommand([p("ledger.csv"), "--labels", p("labels.csv"), "--model", p("live.json"), "--out", p("candidate.json")], c.io);
    expect(c.err()).toBe("");
    expect(code).toBe(0);
    const candidate = await parseArtifact(JSON.parse(await readFile(p("candidate.json"), "utf8")));
    expect(candidate.training).toEqual({ rowsRead: 3040, rowsUsed: 3000, rowsExcludedAsFraud: 40, source: "ledger.csv" });

    // Pooled mean in model units over exactly the 3,000 normal rows (ln amount, ln(1 + items)).
    const normals = rows.filter((r) => r.kind === "normal");
    const mean = [normals.reduce((s, r) => s + Math.log(r.amount), 0) / normals.length, normals.reduce((s, r) => s + Math.log1p(r.items), 0) / normals.length];
    candidate.segments["*"].mean.forEach((m, j) => expect(Math.abs(m - mean[j])).toBeLessThan(1e-9));
    // The live model learnt from the 30 frauds (25 times the usual amount): its mean amount is higher.
    expect(live.segments["*"].mean[0] - candidate.segments["*"].mean[0]).toBeGreaterThan(0.03);
    expect(live.training.rowsUsed).toBe(3030);

    // Same spec as the live model.
    expect(candidate.features.map((f) => [f.name, f.transform])).toEqual(live.features.map((f) => [f.name, f.transform]));
    expect([candidate.covarianceShape, candidate.estimator, candidate.segmentBy, candidate.minSegmentRows]).toEqual([
      live.covarianceShape,
      live.estimator,
      live.segmentBy,
      live.minSegmentRows,
    ]);
    expect(candidate.cutoff.flagRate).toBeCloseTo(0.02, 3);

    const out = c.out();
    expect(out).toContain(
      "ledger: 3,040 rows read from ledger.csv; left out 30 confirmed fraud (labels) and 10 labelled fraud (ledger); kept 120 payments reviewed as legitimate as normal traffic",
    );
    expect(out).toContain("labels: 152 rows from labels.csv (32 fraud); 2 confirmed-fraud ids are not in the ledger (outside the training window)");
    expect(out).toMatch(/PR-AUC \(average precision\) +[\d.]+ +[\d.]+/);
    expect(out).toMatch(/recall at the live flag rate \(≤ [\d.]+ %\) +[\d.]+ +[\d.]+/);
    expect(out).toContain(`wrote candidate ${candidate.version} to ${p("candidate.json")}; it is not live`);

    // Flag overlap on the ledger, recomputed here from the two written models.
    const a = new Scorer(compileModel(live));
    const b = new Scorer(compileModel(candidate));
    const overlap = { live: 0, candidate: 0, both: 0 };
    for (const r of rows) {
      const fa = a.score([r.amount, r.items], r.channel).flagged;
      const fb = b.score([r.amount, r.items], r.channel).flagged;
      overlap.live += fa ? 1 : 0;
      overlap.candidate += fb ? 1 : 0;
      overlap.both += fa && fb ? 1 : 0;
    }
    expect(out).toContain(
      `flag overlap on the ledger (Jaccard, own cutoffs): ${Number(jaccard(overlap).toPrecision(4))} (both ${overlap.both}; live ${overlap.live}, candidate ${overlap.candidate})`,
    );
  });

  it("needs an id column in the ledger to match the labels, and names it", async () => {
    await writeFile(p("noid.csv"), ["amount,items,channel", "40,2,web", "55,3,app"].join("\n") + "\n");
    const c = captureIO();
    expect(await refitCommand([p("noid.csv"), "--labels", p("labels.csv"), "--model", p("live.json"), "--out", p("c2.json")], c.io)).toBe(2);
    expect(c.err()).toContain("has no id column to match the labels against; name it with --id-column (columns are: amount, items, channel)");
  });

  it("refuses a labelled set without confirmed fraud before fitting, naming the file and the rule (exit 2)", async () => {
    const normals = rows.filter((r) => r.kind === "normal").slice(0, 30);
    await writeFile(
      p("no-fraud.csv"),
      ["transactionId,amount,items,channel,outcome,weight", ...normals.map((r) => `${r.id},${r.amount},${r.items},${r.channel},legitimate,1`)].join("\n") + "\n",
    );
    // A ledger whose first data row is malformed: had the fit started, its CsvError would be the answer.
    await writeFile(p("bad-ledger.csv"), ["id,amount,items,channel,label", "ord-1,not-a-number,2,web,"].join("\n") + "\n");
    const c = captureIO();
    expect(await refitCommand([p("bad-ledger.csv"), "--labels", p("no-fraud.csv"), "--model", p("live.json"), "--out", p("c-none.json")], c.io)).toBe(2);
    expect(c.err()).toContain(`${p("no-fraud.csv")}: the labelled set holds no payment confirmed as fraud (30 rows, all legitimate)`);
    expect(c.err()).not.toContain("internal error");
    expect(c.err()).not.toContain("bad-ledger.csv");
    await expect(readFile(p("c-none.json"), "utf8")).rejects.toThrow(/ENOENT/);
  });

  it("matches a tuned live cutoff by the share of training rows it flags, and asks for --cutoff-rate when there is none", async () => {
    // A cutoff set by hand records no flag rate: the candidate flags the share of its own training
    // rows (the 3,000 normal ones) that the live cutoff flags.
    const manual = await retuneArtifact(live, 4, "manual", null);
    await writeFile(p("manual.json"), JSON.stringify(manual));
    const scorer = new Scorer(compileModel(manual));
    const share = rows.filter((r) => r.kind === "normal" && scorer.score([r.amount, r.items], r.channel).flagged).length / 3000;
    const ok = captureIO();
    expect(await refitCommand([p("ledger.csv"), "--labels", p("labels.csv"), "--model", p("manual.json"), "--out", p("c3.json")], ok.io)).toBe(0);
    const candidate = await parseArtifact(JSON.parse(await readFile(p("c3.json"), "utf8")));
    expect(Math.abs(candidate.cutoff.flagRate! - share)).toBeLessThanOrEqual(1 / 3000);
    expect(ok.out()).toContain(`cutoff at ${(share * 100).toFixed(2)} % of training rows (the share of them the live cutoff d² > 4 flags)`);

    await writeFile(p("far.json"), JSON.stringify(await retuneArtifact(live, 1e6, "manual", null)));
    const c = captureIO();
    expect(await refitCommand([p("ledger.csv"), "--labels", p("labels.csv"), "--model", p("far.json"), "--out", p("c5.json")], c.io)).toBe(2);
    expect(c.err()).toContain("the live cutoff (basis manual, d² > 1000000) flags 0 of the 3,000 training rows, so there is no share to match; give --cutoff-rate");
    for (const [args, message] of [
      [[p("ledger.csv"), "--model", p("live.json"), "--out", p("c4.json")], "option --labels is required"],
      [[p("ledger.csv"), "--labels", p("labels.csv"), "--out", p("c4.json")], "option --model is required"],
      [[p("ledger.csv"), "--labels", p("labels.csv"), "--model", p("live.json")], "option --out is required"],
      [[p("ledger.csv"), "--labels", p("labels.csv"), "--model", p("live.json"), "--out", p("labels.csv")], "option --out names an input file"],
    ] as [string[], string][]) {
      const run = captureIO();
      expect(await refitCommand(args, run.io)).toBe(2);
      expect(run.err()).toContain(message);
    }
  });
});

describe("jaccard", () => {
  it("divides the flags both models raise by the flags either raises, and calls two empty sets equal", () => {
    expect(jaccard({ live: 10, candidate: 12, both: 8 })).toBe(8 / 14);
    expect(jaccard({ live: 0, candidate: 0, both: 0 })).toBe(1);
  });
});
