import { mkdtemp, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { fitModel } from "../shared-model/src/fit";
import type { FeatureDeclaration } from "../shared-model/src/types";
import { CsvError } from "./csv";
import { labelCell, LedgerRowSource, openLedger, parseLabel, resolveLedgerLayout } from "./ledger";

let dir: string;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-ledger-"));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function file(name: string, content: string): Promise<string> {
  const path = join(dir, name);
  await writeFile(path, content);
  return path;
}

const plain = (...names: string[]): FeatureDeclaration[] => names.map((name) => ({ name, transform: "none" }));

async function failure(run: () => Promise<unknown>): Promise<CsvError> {
  try {
    await run();
  } catch (error) {
    if (error instanceof CsvError) return error;
    throw error;
  }
  throw new Error("expected a CsvError");
}

describe("labels", () => {
  it("reads fraud/legitimate and 1/0 in any case, and an empty cell as not reviewed", () => {
    expect(parseLabel("fraud")).toBe("fraud");
    expect(parseLabel("FRAUD")).toBe("fraud");
    expect(parseLabel(" Fraud ")).toBe("fraud");
    expect(parseLabel("1")).toBe("fraud");
    expect(parseLabel("legitimate")).toBe("legitimate");
    expect(parseLabel("Legitimate")).toBe("legitimate");
    expect(parseLabel("0")).toBe("legitimate");
    expect(parseLabel("")).toBeNull();
    expect(parseLabel("  ")).toBeNull();
  });

  it("refuses anything else, naming the line and the column", () => {
    for (const text of ["yes", "2", "0.0", "true", "fraudulent", "-1"]) expect(parseLabel(text)).toBeUndefined();
    expect(() => labelCell("maybe", "ledger.csv", 9, "label")).toThrow(
      "ledger.csv line 9, column 'label': 'maybe' is not a label; expected fraud, legitimate, 1, 0 or an empty cell",
    );
  });
});

describe("ledger layout", () => {
  const header = ["id", "amount", "items", "label", "channel"];

  it("finds features and uses the id and label columns by their default names", () => {
    const layout = resolveLedgerLayout(header, "ledger.csv", { features: plain("items", "amount") });
    expect(layout.featureIndex).toEqual([2, 1]);
    expect([layout.idColumn, layout.idIndex, layout.labelColumn, layout.labelIndex]).toEqual(["id", 0, "label", 3]);
    expect(layout.segmentIndex).toBe(-1);
  });

  it("goes without id and label when the header has neither and none was asked for", () => {
    const layout = resolveLedgerLayout(["amount"], "ledger.csv", { features: plain("amount") });
    expect([layout.idColumn, layout.labelColumn]).toEqual([null, null]);
  });

  it("names a missing feature, id, label or segment column and lists the header", () => {
    expect(() => resolveLedgerLayout(header, "ledger.csv", { features: plain("amount", "velocity_1h") })).toThrow(
      "column 'velocity_1h' (feature) not found in header of ledger.csv; columns are: id, amount, items, label, channel",
    );
    expect(() => resolveLedgerLayout(header, "ledger.csv", { features: plain("amount"), labelColumn: "outcome" })).toThrow("column 'outcome' (--label-column) not found");
    expect(() => resolveLedgerLayout(header, "ledger.csv", { features: plain("amount"), idColumn: "ref" })).toThrow("column 'ref' (--id-column) not found");
    expect(() => resolveLedgerLayout(header, "ledger.csv", { features: plain("amount"), segmentColumn: "country" })).toThrow("column 'country' (segment column) not found");
  });

  it("refuses a feature listed twice and a feature that is also the label or segment column", () => {
    expect(() => resolveLedgerLayout(header, "ledger.csv", { features: plain("amount", "amount") })).toThrow("feature 'amount' is listed twice");
    expect(() => resolveLedgerLayout(header, "ledger.csv", { features: plain("amount", "label") })).toThrow("column 'label' of ledger.csv is both a feature and the label column");
    expect(() => resolveLedgerLayout(header, "ledger.csv", { features: plain("amount", "items"), segmentColumn: "items" })).toThrow("is both a feature and the segment column");
  });
});

describe("reading a ledger", () => {
  it("yields values in feature order with id, label, segment and line", async () => {
    const path = await file("ok.csv", 'id,amount,items,label,channel\nA1,12.5,2,,web\nA2,80,1,FRAUD,\n"A,3",7,3,0,app\n');
    const ledger = await openLedger(path, { features: plain("items", "amount"), segmentColumn: "channel" });
    const rows = [];
    for await (const row of ledger.rows) rows.push({ ...row, values: Array.from(row.values) });
    expect(rows).toEqual([
      { line: 2, rowNumber: 1, id: "A1", label: null, segment: "web", values: [2, 12.5], timeMs: Number.NaN },
      { line: 3, rowNumber: 2, id: "A2", label: "fraud", segment: null, values: [1, 80], timeMs: Number.NaN },
      { line: 4, rowNumber: 3, id: "A,3", label: "legitimate", segment: "app", values: [3, 7], timeMs: Number.NaN },
    ]);
  });

  it("reads each payment's time from the time column and names the line of a time that is not ISO-8601", async () => {
    const path = await file("timed.csv", "id,amount,at\nA1,12.5,2026-11-02T09:30:00Z\nA2,80,2026-11-02T10:00:00+01:00\nA3,7,yesterday\n");
    const ledger = await openLedger(path, { features: plain("amount"), timeColumn: "at" });
    const times: number[] = [];
    const error = await failure(async () => {
      for await (const row of ledger.rows) times.push(row.timeMs);
    });
    expect(times).toEqual([Date.UTC(2026, 10, 2, 9, 30), Date.UTC(2026, 10, 2, 9, 0)]);
    expect(error.message).toContain("line 4, column 'at': 'yesterday' is not an ISO-8601 time with a zone");
  });

  it("numbers the rows when there is no id column", async () => {
    const path = await file("noid.csv", "amount\n3\n4\n");
    const ledger = await openLedger(path, { features: plain("amount") });
    const ids = [];
    for await (const row of ledger.rows) ids.push(row.id);
    expect(ids).toEqual(["1", "2"]);
  });

  it("refuses a non-numeric feature cell with file, line and column", async () => {
    const path = await file("bad-number.csv", "id,amount\n1,10\n2,abc\n");
    const error = await failure(async () => {
      const ledger = await openLedger(path, { features: plain("amount") }, { label: "ledger.csv" });
      for await (const _ of ledger.rows);
    });
    expect(error.message).toBe("ledger.csv line 3, column 'amount': 'abc' is not a number");
  });

  it("refuses a value outside its transform's domain with file, line and column", async () => {
    const path = await file("bad-domain.csv", "amount\n10\n-3\n");
    const error = await failure(async () => {
      const ledger = await openLedger(path, { features: [{ name: "amount", transform: "log" }] }, { label: "ledger.csv" });
      for await (const _ of ledger.rows);
    });
    expect(error.line).toBe(3);
    expect(error.column).toBe("amount");
    expect(error.message).toBe("ledger.csv line 3, column 'amount': must be > 0 for the log transform; got -3");
  });

  it("refuses a bad label with file, line and column", async () => {
    const path = await file("bad-label.csv", "amount,label\n1,fraud\n2,suspicious\n");
    const error = await failure(async () => {
      const ledger = await openLedger(path, { features: plain("amount") }, { label: "ledger.csv" });
      for await (const _ of ledger.rows);
    });
    expect(error.message).toBe("ledger.csv line 3, column 'label': 'suspicious' is not a label; expected fraud, legitimate, 1, 0 or an empty cell");
  });
});

describe("the ledger as the fit's row source", () => {
  it("leaves out rows labelled fraud, counts them, and restarts from the first row on every pass", async () => {
    const path = await file("source.csv", "amount,label\n1,\n2,legitimate\n500,fraud\n3,0\n900,1\n");
    const source = new LedgerRowSource(path, { features: plain("amount") });
    for (let pass = 0; pass < 2; pass++) {
      const seen = [];
      for await (const row of source.pass()) seen.push(row.values[0]);
      expect(seen).toEqual([1, 2, 3]);
      expect(source.counts).toEqual({ rowsRead: 5, rowsExcludedAsFraud: 2, rowsUsed: 3 });
    }
  });

  it("gives the fit the mean and covariance of the rows not labelled fraud only", async () => {
    // Fictional payments: 300 normal rows on a grid, plus 5 far-away rows confirmed as fraud.
    const lines = ["amount,items,label"];
    const normal: number[][] = [];
    for (let i = 0; i < 300; i++) {
      const row = [20 + (i % 17) * 3.5, 1 + ((i * 7) % 5)];
      normal.push(row);
      lines.push(`${row[0]},${row[1]},${i % 3 === 0 ? "legitimate" : ""}`);
    }
    for (let i = 0; i < 5; i++) lines.push(`${5000 + i},${40 + i},fraud`);
    const path = await file("fit.csv", lines.join("\n") + "\n");
    const source = new LedgerRowSource(path, { features: plain("amount", "items") });
    const { artifact } = await fitModel(source, {
      features: plain("amount", "items"),
      shape: "full",
      estimator: "classical",
      segmentBy: null,
      cutoffRate: 0.01,
      createdAt: "2026-01-15T10:00:00Z",
      get rowsRead() {
        return source.counts.rowsRead;
      },
      get rowsExcludedAsFraud() {
        return source.counts.rowsExcludedAsFraud;
      },
    });
    const m = normal.length;
    const mean = [0, 1].map((j) => normal.reduce((s, r) => s + r[j], 0) / m);
    const cov01 = normal.reduce((s, r) => s + (r[0] - mean[0]) * (r[1] - mean[1]), 0) / m;
    expect(artifact.segments["*"].mean[0]).toBeCloseTo(mean[0], 10);
    expect(artifact.segments["*"].mean[1]).toBeCloseTo(mean[1], 10);
    expect(artifact.segments["*"].covariance[0][1]).toBeCloseTo(cov01, 10);
    expect(artifact.training).toEqual({ rowsRead: 305, rowsUsed: 300, rowsExcludedAsFraud: 5, source: null });
  });
});
