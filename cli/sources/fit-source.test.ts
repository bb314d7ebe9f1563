/**
 * A fit whose transforms have a parameter to fit (Yeo–Johnson λ) reads its source once and makes
 * its second pass over a staged copy: the same model as reading the source again, the same error
 * for a bad value, and no staged copy left behind, whether the fit succeeds or fails. Data: the
 * fictional demo shop (invented) and invented columns.
 */
import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { fileURLToPath } from "node:url";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { ledgerCsvLines } from "../../demo-ledger/generate";
import type { ModelArtifact } from "../../shared-model/src/artifact";
import { FitRefusal } from "../../shared-model/src/diagnostics";
import type { FitOptions, RowSource } from "../../shared-model/src/fit";
import { parseRecordSpec } from "../../shared-model/src/records/spec";
import { createRandom } from "../../shared-model/src/random";
import type { FeatureDeclaration } from "../../shared-model/src/types";
import { captureIO } from "../capture-io";
import { deriveCommand } from "../commands/derive";
import { LedgerRowSource, type LedgerRequest } from "../ledger";
import type { RecordsSpec } from "../records";
import { type FitPasses, fitRowSource, fitSource } from "./fit-source";
import { csvSource } from "./source";

const dir = mkdtempSync(join(tmpdir(), "isodense-fit-passes-"));
const p = (name: string): string => join(dir, name);
const demoSpec = parseRecordSpec(JSON.parse(readFileSync(fileURLToPath(new URL("../../demo-ledger/spec.json", import.meta.url)), "utf8"))) as RecordsSpec;
const features: FeatureDeclaration[] = demoSpec.features.map(({ name, transform }) => ({ name, transform }));

function options(extra: Partial<FitOptions> = {}): FitOptions {
  return { features, shape: "full", estimator: "classical", segmentBy: "channel", cutoffRate: 0.01, seed: 3, createdAt: "2026-12-04T12:00:00.000Z", ...extra };
}

/** The largest relative difference between the numbers of two artifacts, failing on any other difference. */
function largestRelativeDifference(a: unknown, b: unknown, path = "artifact"): number {
  if (typeof a === "number" && typeof b === "number") {
    if (a === b) return 0;
    return Math.abs(a - b) / Math.max(Math.abs(a), Math.abs(b));
  }
  if (a !== null && b !== null && typeof a === "object" && typeof b === "object") {
    expect(Object.keys(a).sort(), path).toEqual(Object.keys(b).sort());
    let worst = 0;
    for (const key of Object.keys(a))
      worst = Math.max(worst, largestRelativeDifference((a as Record<string, unknown>)[key], (b as Record<string, unknown>)[key], `${path}.${key}`));
    return worst;
  }
  expect(a, path).toEqual(b);
  return 0;
}

/** Numbers of two artifacts equal to 1e-12 relative; version and checksum name content, so they may differ only with it. */
function expectSameModel(staged: ModelArtifact, reread: ModelArtifact): void {
  const strip = ({ version: _v, checksum: _c, ...content }: ModelArtifact) => content;
  expect(largestRelativeDifference(strip(staged), strip(reread))).toBeLessThanOrEqual(1e-12);
}

/** Stage folders under `root` and the files in them. */
function staged(root: string): string[] {
  return readdirSync(root, { recursive: true }).map(String);
}

/** A CSV of invented payments: a skewed amount (Yeo–Johnson), two ordinary columns, a label and a channel. */
function inventedCsv(rows: number, edit?: (cells: string[], row: number) => void): string {
  const random = createRandom(17);
  const lines = ["id,amount,items,distance,label,channel"];
  for (let r = 0; r < rows; r++) {
    const u = random.next();
    const cells = [
      `p${r}`,
      (Math.exp(3 + random.next() * 2) * (1 + u)).toFixed(2),
      String(1 + Math.floor(random.next() * 6)),
      (random.next() * 40 + u * 10).toFixed(3),
      r % 97 === 5 ? "fraud" : r % 11 === 0 ? "legitimate" : "",
      ["web", "app", "phone"][r % 3],
    ];
    edit?.(cells, r);
    lines.push(cells.join(","));
  }
  return lines.join("\n") + "\n";
}

const csvFeatures: FeatureDeclaration[] = [
  { name: "amount", transform: "yeo-johnson" },
  { name: "items", transform: "log1p" },
  { name: "distance", transform: "none" },
];
const csvRequest: LedgerRequest = { features: csvFeatures, segmentColumn: "channel" };

beforeAll(async () => {
  writeFileSync(p("records.csv"), [...ledgerCsvLines({ rows: 3000 })].join("\n") + "\n");
  writeFileSync(p("invented.csv"), inventedCsv(6000));
  const c = captureIO();
  expect(await deriveCommand([p("records.csv"), "--spec", fileURLToPath(new URL("../../demo-ledger/spec.json", import.meta.url)), "--out", p("features.csv")], c.io), c.err()).toBe(
    0,
  );
}, 60_000);

afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe("a fit with a Yeo–Johnson feature reads its source once", () => {
  test("a CSV read through DuckDB gives the same model from its staged copy as from reading the CSV again", async () => {
    for (const estimator of ["classical", "shrinkage"] as const) {
      for (const file of ["invented.csv", "features.csv"]) {
        const fileFeatures = file === "invented.csv" ? csvFeatures : features;
        const request = file === "invented.csv" ? csvRequest : { features, segmentColumn: "channel", idColumn: "paymentId" };
        const fit = (passes: FitPasses) => fitSource(csvSource(p(file)), request, options({ features: fileFeatures, estimator }), passes);
        const stagedFit = await fit({ mode: "staged" });
        const rereadFit = await fit({ mode: "reread" });
        expect(stagedFit.artifact.features.find((f) => f.transform === "yeo-johnson")?.lambda).toBeDefined();
        expectSameModel(stagedFit.artifact, rereadFit.artifact);
      }
    }
  }, 60_000);

  test("a ledger of payment records derives each row once and gives the same model as deriving every row twice", async () => {
    const fit = async (passes: FitPasses) => {
      const ledger = new LedgerRowSource(csvSource(p("records.csv")), { features, segmentColumn: "channel", records: demoSpec });
      let reads = 0;
      const counted: RowSource = {
        pass: () => {
          reads++;
          return ledger.pass();
        },
      };
      const result = await fitRowSource(counted, () => ledger.counts, options(), "derived from records", passes);
      return { ...result, reads };
    };
    const stagedFit = await fit({ mode: "staged" });
    const rereadFit = await fit({ mode: "reread" });
    expect([stagedFit.reads, rereadFit.reads]).toEqual([1, 2]);
    expect(stagedFit.artifact.training.rowsExcludedAsFraud).toBeGreaterThan(0);
    expectSameModel(stagedFit.artifact, rereadFit.artifact);
    expect(stagedFit.artifact.version).toBe(rereadFit.artifact.version);
  }, 60_000);
});

describe("the staged copy is removed whatever happens", () => {
  test("a bad value late in a CSV is named by line and column as before, from the first read, and leaves no staged copy", async () => {
    // Row 5000 (line 5001): text where a number belongs (DuckDB refuses the read), or a number
    // outside log1p's domain (refused as the block is checked, after two blocks were staged).
    const cases = [
      { name: "text.csv", column: 3, cell: "far", message: /text\.csv line 5001, column 'distance': 'far' is not a number/ },
      { name: "domain.csv", column: 2, cell: "-3", message: /domain\.csv line 5001, column 'items': .*-3/ },
    ];
    for (const { name, column, cell, message } of cases) {
      writeFileSync(
        p(name),
        inventedCsv(6000, (cells, r) => {
          if (r === 4999) cells[column] = cell;
        }),
      );
      const root = mkdtempSync(p("stage-root-"));
      const seen: string[][] = [];
      const onProgress = () => void seen.push(staged(root));
      const errors: string[] = [];
      for (const mode of ["staged", "reread"] as const) {
        const failed = await fitSource(csvSource(p(name)), csvRequest, options({ features: csvFeatures, onProgress }), { mode, tempRoot: root }).catch((e: Error) => e);
        expect(failed).toBeInstanceOf(Error);
        errors.push((failed as Error).message);
        expect(staged(root), mode).toEqual([]);
      }
      expect(errors[0]).toBe(errors[1]);
      expect(errors[0]).toMatch(message);
      if (name === "domain.csv") expect(seen.some((files) => files.some((f) => f.endsWith("rows.f64")))).toBe(true);
    }
  }, 60_000);

  test("a fit refused after the rows were staged, and a records ledger whose derivation fails, leave no staged copy", async () => {
    writeFileSync(
      p("constant.csv"),
      inventedCsv(3000, (cells) => (cells[3] = "7.000")),
    );
    const root = mkdtempSync(p("stage-root-"));
    const refused = await fitSource(csvSource(p("constant.csv")), csvRequest, options({ features: csvFeatures }), { mode: "staged", tempRoot: root }).catch((e: Error) => e);
    expect(refused).toBeInstanceOf(FitRefusal);
    expect(staged(root)).toEqual([]);

    // A payment earlier in time than the one before it, near the end of the records.
    const lines = readFileSync(p("records.csv"), "utf8").trimEnd().split("\n");
    [lines[2900], lines[2901]] = [lines[2901], lines[2900]];
    writeFileSync(p("unordered.csv"), lines.join("\n") + "\n");
    const ledger = new LedgerRowSource(csvSource(p("unordered.csv")), { features, segmentColumn: "channel", records: demoSpec });
    const failed = await fitRowSource(ledger, () => ledger.counts, options(), "derived from records", { mode: "staged", tempRoot: root }).catch((e: Error) => e);
    expect((failed as Error).message).toMatch(/unordered\.csv line 290[12]/);
    expect(staged(root)).toEqual([]);
  }, 60_000);
});
