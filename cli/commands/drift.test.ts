import { mkdtemp, readFile, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { referencePsi } from "../../shared-model/src/drift";
import { captureIO } from "../capture-io";
import { main } from "../main";
import type { DriftReport } from "./drift";

let dir: string;

async function isodense(argv: string[]): Promise<{ code: number; out: string; err: string }> {
  const c = captureIO();
  const code = await main(argv, c.io);
  return { code, out: c.out(), err: c.err() };
}

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-drift-"));
  const ledger = join(dir, "ledger.csv");
  expect((await isodense(["demo-ledger", "--out", ledger, "--rows", "12000"])).code).toBe(0);
  const fit = await isodense(["fit", ledger, "--spec", "demo-ledger/spec.json", "--segment-by", "channel", "--out", join(dir, "model.json")]);
  expect(fit.code, fit.err).toBe(0);
}, 120_000);

afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

describe("isodense drift", () => {
  it("finds the training ledger stable against its own model: PSI below 0.01 on every demo column and the score", async () => {
    const run = await isodense(["drift", join(dir, "model.json"), join(dir, "ledger.csv"), "--out", join(dir, "drift.json")]);
    expect(run.code, run.err).toBe(0);
    const report = JSON.parse(await readFile(join(dir, "drift.json"), "utf8")) as DriftReport;
    expect(report.baseline).toBe("training shares");
    expect(report.rowsLeftOutAsFraud).toBeGreaterThan(0);
    console.log(report.drift.map((d) => `${d.name} ${d.psi?.toFixed(5)}`).join(", "));
    for (const row of report.drift) {
      expect(row.psi, `${row.name}: ${row.note}`).not.toBeNull();
      expect(row.psi!, row.name).toBeLessThan(0.01);
    }
    expect(run.out).toContain("baseline: training shares");
    expect(run.out).toContain(`wrote ${join(dir, "drift.json")}`);
  });

  it("stores the training share of each bucket, which is not 10 % where a count column ties", async () => {
    const model = JSON.parse(await readFile(join(dir, "model.json"), "utf8"));
    const j = model.columns.indexOf("paymentsLast24h");
    const shares: number[] = model.reference.columnShares[j];
    expect(shares).toHaveLength(model.reference.columnEdges[j].length + 1);
    expect(Math.abs(shares.reduce((a, b) => a + b, 0) - 1)).toBeLessThan(1e-9);
    // The training data against equal shares (the baseline before shares were stored) looks
    // like drift; against the counted shares it is stable.
    const counts = shares.map((s) => Math.round(s * 100_000));
    expect(referencePsi(model.reference.columnEdges[j], counts)).toBeGreaterThan(0.01);
    expect(referencePsi(model.reference.columnEdges[j], counts, shares)).toBeLessThan(1e-6);
  });

  it("explains itself with --help and names a missing model file", async () => {
    const help = await isodense(["drift", "--help"]);
    expect(help.code).toBe(0);
    expect(help.out).toContain("usage: isodense drift <model.json> <ledger>");
    const missing = await isodense(["drift", join(dir, "none.json"), join(dir, "ledger.csv")]);
    expect(missing.code).toBe(2);
    expect(missing.err).toContain("model file not found");
  });
});
