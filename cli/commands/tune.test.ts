/**
 * `isodense tune` in-process on a fictional shop's ledger and labelled set: the written model is
 * checked against brute force over every cutoff, and every bad input against its message.
 */
import { mkdtemp, readFile, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { parseArtifact, type ModelArtifact } from "../../shared-model/src/artifact";
import { createRandom } from "../../shared-model/src/random";
import { compileModel, Scorer } from "../../shared-model/src/score";
import { fitCommand } from "./fit";
import { parseCapacity, parseCosts, tuneCommand } from "./tune";
import { captureIO } from "../capture-io";

let dir: string;
let live: ModelArtifact;

interface Labelled {
  id: string;
  amount: number;
  items: number;
  channel: string;
  fraud: boolean;
  weight: number;
}
let labelled: Labelled[];

/** An invented shop: amounts grow with basket size; fraud buys far more per item. */
function payment(random: ReturnType<typeof createRandom>, fraud: boolean): { amount: number; items: number } {
  const normal = (): number => Math.sqrt(-2 * Math.log(1 - random.next())) * Math.cos(2 * Math.PI * random.next());
  const items = Math.max(1, Math.round(2 + normal()));
  const amount = Math.exp(3.4 + 0.3 * items + 0.35 * normal()) * (fraud ? 2 + random.next() * 10 : 1);
  return { amount: Number(amount.toFixed(2)), items };
}

function labelsCsv(rows: Labelled[], header = "transactionId,amount,items,channel,outcome,weight"): string {
  return [header, ...rows.map((r) => `${r.id},${r.amount},${r.items},${r.channel},${r.fraud ? "fraud" : "legitimate"},${r.weight}`)].join("\n") + "\n";
}

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-tune-"));
  const random = createRandom(41);
  const ledger = ["id,amount,items,channel"];
  for (let i = 0; i < 2000; i++) {
    const p = payment(random, false);
    ledger.push(`ord-${i},${p.amount},${p.items},${i % 3 === 0 ? "app" : "web"}`);
  }
  await writeFile(join(dir, "ledger.csv"), ledger.join("\n") + "\n");
  await writeFile(
    join(dir, "spec.json"),
    JSON.stringify({
      features: [
        { name: "amount", transform: "log" },
        { name: "items", transform: "log1p" },
      ],
    }),
  );
  const fit = captureIO();
  const code = await fitCommand(
    ["ledger.csv", "--out", join(dir, "live.json"), "--spec", join(dir, "spec.json"), "--segment-by", "channel"].map((a) => (a === "ledger.csv" ? join(dir, a) : a)),
    fit.io,
  );
  expect(fit.err()).toBe("");
  expect(code).toBe(0);
  live = await parseArtifact(JSON.parse(await readFile(join(dir, "live.json"), "utf8")));
  // Reviewed payments: 60 confirmed frauds and 240 dismissed flags reviewed with π = 1, and an
  // audit sample of 400 ordinary payments drawn at 5 % (weight 20), 12 of them missed fraud.
  labelled = [];
  for (let i = 0; i < 700; i++) {
    const fraud = i < 60 || (i >= 300 && i < 312);
    const p = payment(random, fraud);
    labelled.push({ id: `pay-${i}`, ...p, channel: i % 4 === 0 ? "app" : "web", fraud, weight: i < 300 ? 1 : 20 });
  }
  await writeFile(join(dir, "labels.csv"), labelsCsv(labelled));
});

afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

let scored: number[] | null = null;

/** d² of every labelled payment under the live model (the same scorer the worker uses). */
function scores(): number[] {
  if (scored === null) {
    const scorer = new Scorer(compileModel(live));
    scored = labelled.map((r) => scorer.score([r.amount, r.items], r.channel).mahalanobisSq);
  }
  return scored;
}

/** Weighted confusion counts of "flag when d² > cutoff", by direct counting. */
function counts(cutoff: number) {
  const d2 = scores();
  const c = { tp: 0, fp: 0, fn: 0, tn: 0, total: 0 };
  labelled.forEach((r, i) => {
    const flagged = d2[i] > cutoff;
    if (r.fraud && flagged) c.tp += r.weight;
    else if (r.fraud) c.fn += r.weight;
    else if (flagged) c.fp += r.weight;
    else c.tn += r.weight;
    c.total += r.weight;
  });
  return c;
}

function everyCutoff(): number[] {
  const d = [...new Set(scores())].sort((a, b) => a - b);
  return [d[0] / 2, ...d];
}

async function tune(args: string[]): Promise<{ code: number; out: string; err: string; artifact: ModelArtifact | null }> {
  const c = captureIO();
  const outFile = join(dir, `tuned-${Math.random().toString(36).slice(2)}.json`);
  const code = await tuneCommand([join(dir, "labels.csv"), "--model", join(dir, "live.json"), "--out", outFile, ...args], c.io);
  let artifact: ModelArtifact | null = null;
  if (code === 0) artifact = await parseArtifact(JSON.parse(await readFile(outFile, "utf8")));
  return { code, out: c.out(), err: c.err(), artifact };
}

describe("isodense tune", () => {
  it("writes a new version with the best F1 cutoff, checked by brute force over every cutoff", async () => {
    const run = await tune([]);
    expect(run.err).toBe("");
    expect(run.code).toBe(0);
    const tuned = run.artifact!;
    expect(tuned.version).not.toBe(live.version);
    expect(tuned.segments).toEqual(live.segments);
    expect(tuned.cutoff.basis).toBe("f1");
    const f1 = (c: ReturnType<typeof counts>): number => (2 * c.tp) / (2 * c.tp + c.fp + c.fn);
    const best = Math.max(...everyCutoff().map((cut) => f1(counts(cut))));
    expect(f1(counts(tuned.cutoff.mahalanobisSq))).toBeCloseTo(best, 12);
    const at = counts(tuned.cutoff.mahalanobisSq);
    expect(tuned.cutoff.flagRate).toBeCloseTo((at.tp + at.fp) / at.total, 12);
    expect(run.out).toContain("labels: 700 rows from labels.csv (72 fraud, 628 legitimate); weights from 'weight' (Σ = 8,300 payments represented)");
    expect(run.out).toContain("scored under model " + live.version + ", segments from column 'channel'");
    expect(run.out).toMatch(/PR-AUC \(average precision, step-wise\): 0\.\d+/);
    expect(run.out).toMatch(/^→ +[\d.]+ /m);
    expect(run.out).toMatch(/chosen \(best F1\): flag when d² > [\d.]+ \(tail probability P\(χ²2 > d²\) < /);
    expect(run.out).toContain("estimates for all traffic at the chosen cutoff (Horvitz–Thompson, 95 % intervals; 8,300 payments, Σ weights):");
    expect(run.out).toContain("labels: enough (12 effective audit-sample frauds)");
    expect(run.out).toContain(`wrote model ${tuned.version} to`);
  });

  it("never plans more reviews per day than the stated capacity, and gets the best recall that fits", async () => {
    for (const capacity of [0, 3, 10, 40]) {
      const run = await tune(["--objective", "capacity", "--capacity", `${capacity}/day`, "--daily-payments", "1000"]);
      expect(run.code, run.err).toBe(0);
      const cut = run.artifact!.cutoff.mahalanobisSq;
      const c = counts(cut);
      expect(((c.tp + c.fp) / c.total) * 1000).toBeLessThanOrEqual(capacity);
      for (const other of everyCutoff()) {
        const o = counts(other);
        if (((o.tp + o.fp) / o.total) * 1000 <= capacity) expect(o.tp / (o.tp + o.fn)).toBeLessThanOrEqual(c.tp / (c.tp + c.fn) + 1e-12);
      }
      expect(run.artifact!.cutoff.basis).toBe("capacity");
    }
  });

  it("finds the least expected cost, checked by brute force, and reports it per day", async () => {
    const run = await tune(["--objective", "cost", "--costs", "review=3,fraud=150,friction=2", "--daily-payments", "1000", "--scored-payments", "9000"]);
    expect(run.code, run.err).toBe(0);
    const cost = (c: ReturnType<typeof counts>): number => (150 * c.fn + 3 * (c.tp + c.fp) + 2 * c.fp) / c.total;
    const least = Math.min(...everyCutoff().map((cut) => cost(counts(cut))));
    expect(cost(counts(run.artifact!.cutoff.mahalanobisSq))).toBeCloseTo(least, 12);
    expect(run.out).toContain("9,000 payments, given with --scored-payments");
    expect(run.out).toMatch(/expected cost [\d.]+ per payment \([\d.]+ per day\)/);
    expect(run.out).toContain("cost/day");
  });

  it("refuses every bad option with a message naming it, and writes nothing", async () => {
    const cases: [string[], RegExp][] = [
      [["--objective", "capacity", "--daily-payments", "1000"], /--objective capacity needs --capacity N\/day/],
      [["--objective", "capacity", "--capacity", "40"], /--objective capacity needs --daily-payments N/],
      [["--capacity", "40"], /option --capacity is used only with --objective capacity/],
      [["--objective", "capacity", "--capacity", "lots", "--daily-payments", "9"], /option --capacity must be a number of reviews per day ≥ 0, e.g. 400 or 400\/day; got 'lots'/],
      [["--objective", "cost"], /--objective cost needs --costs review=…,fraud=…,friction=…/],
      [["--objective", "cost", "--costs", "review=3,fraud=150"], /option --costs is missing friction/],
      [["--objective", "cost", "--costs", "review=3,fraud=-1,friction=0"], /option --costs: fraud must be an amount ≥ 0/],
      [["--objective", "cost", "--costs", "review=3,fraud=1,friction=0,tax=2"], /option --costs: 'tax' is not a cost/],
      [["--objective", "best"], /option --objective must be one of f1, capacity, cost; got 'best'/],
      [["--daily-payments", "0"], /option --daily-payments must be > 0; got 0/],
      [["--scored-payments", "500"], /option --scored-payments \(500\) is below the 700 labelled payments/],
    ];
    for (const [args, message] of cases) {
      const run = await tune(args);
      expect(run.code, args.join(" ")).toBe(2);
      expect(run.err, args.join(" ")).toMatch(message);
      expect(run.out).toBe("");
    }
    const c = captureIO();
    expect(await tuneCommand([join(dir, "labels.csv"), "--model", join(dir, "live.json"), "--out", join(dir, "labels.csv")], c.io)).toBe(2);
    expect(c.err()).toContain("option --out names an input file");
    const noModel = captureIO();
    expect(await tuneCommand([join(dir, "labels.csv"), "--out", join(dir, "x.json")], noModel.io)).toBe(2);
    expect(noModel.err()).toContain("option --model is required");
  });

  it("refuses a labelled set without fraud, or with a bad cell, naming file, line and column", async () => {
    await writeFile(join(dir, "no-fraud.csv"), labelsCsv(labelled.filter((r) => !r.fraud)));
    const c = captureIO();
    expect(await tuneCommand([join(dir, "no-fraud.csv"), "--model", join(dir, "live.json"), "--out", join(dir, "nf.json")], c.io)).toBe(2);
    expect(c.err()).toContain("no row is labelled fraud in 'outcome'; a cutoff cannot be tuned without confirmed fraud");
    await writeFile(join(dir, "bad-weight.csv"), labelsCsv(labelled.slice(0, 3)).replace(/,1\n$/, ",0.2\n"));
    const w = captureIO();
    expect(await tuneCommand([join(dir, "bad-weight.csv"), "--model", join(dir, "live.json"), "--out", join(dir, "bw.json")], w.io)).toBe(2);
    expect(w.err()).toContain("bad-weight.csv line 4, column 'weight': 0.2 is not a weight");
  });
});

describe("parseCapacity and parseCosts", () => {
  it("read 400 and 400/day alike, and all three costs by name in any order", () => {
    expect(parseCapacity("400")).toBe(400);
    expect(parseCapacity("400/day")).toBe(400);
    expect(parseCosts("friction=0,fraud=180.5,review=4")).toEqual({ reviewCost: 4, missedFraudCost: 180.5, frictionCost: 0 });
    expect(() => parseCosts("review=1,review=2,fraud=1,friction=1")).toThrow("option --costs: review is given twice");
  });
});
