import { describe, expect, it } from "vitest";
import { RecordInputError, recordColumns, recordFromFields, recordValueColumns } from "./record";
import { parseRecordSpec } from "./spec";

const spec = parseRecordSpec({
  record: { id: "paymentId", time: "createdAt", account: "accountRef", segment: "channel" },
  features: [
    { name: "amount", transform: "log" },
    { name: "share", transform: "none", ratio: ["shipping", "amount"] },
    { name: "age", transform: "log1p", since: { column: "openedAt", unit: "days" } },
    { name: "places", transform: "log1p", distinct: { column: "shipTo", within: "30d" } },
  ],
});

const FIELDS = {
  paymentId: "p-1",
  createdAt: "2026-10-01T08:00:00Z",
  accountRef: "acct-1",
  channel: "web",
  amount: "42.50",
  shipping: "4.90",
  openedAt: "2026-09-01T08:00:00+02:00",
  shipTo: "zone-7",
  note: "ignored",
};

function errorOf(fields: Record<string, unknown>): RecordInputError {
  try {
    recordFromFields(spec, fields);
  } catch (err) {
    if (err instanceof RecordInputError) return err;
    throw err;
  }
  throw new Error("the record was accepted");
}

describe("recordFromFields", () => {
  it("reads numbers, timestamps and text from string cells and ignores other fields", () => {
    expect(recordFromFields(spec, FIELDS)).toEqual({
      id: "p-1",
      timeMs: Date.UTC(2026, 9, 1, 8),
      account: "acct-1",
      segment: "web",
      values: { amount: 42.5, shipping: 4.9, openedAt: Date.UTC(2026, 8, 1, 6), shipTo: "zone-7" },
    });
  });

  it("accepts JSON numbers as they come (the edge's payment object)", () => {
    expect(recordFromFields(spec, { ...FIELDS, amount: 42.5, shipping: 0, shipTo: 7 }).values).toMatchObject({ amount: 42.5, shipping: 0, shipTo: "7" });
  });

  it("names the field and the rule of a missing, empty or malformed value", () => {
    const { amount: _a, ...withoutAmount } = FIELDS;
    expect(errorOf(withoutAmount)).toMatchObject({ field: "amount", rule: "is required" });
    expect(errorOf({ ...FIELDS, amount: "12,50" })).toMatchObject({ field: "amount", rule: 'must be a finite number; got "12,50"' });
    expect(errorOf({ ...FIELDS, amount: "Infinity" })).toMatchObject({ field: "amount" });
    expect(errorOf({ ...FIELDS, createdAt: "2026-10-01T08:00:00" })).toMatchObject({ field: "createdAt", rule: expect.stringContaining("ISO 8601 timestamp with Z or an offset") });
    expect(errorOf({ ...FIELDS, accountRef: " " })).toMatchObject({ field: "accountRef", rule: "is required; got an empty value" });
    expect(errorOf({ ...FIELDS, paymentId: { id: 1 } })).toMatchObject({ field: "paymentId", rule: "must be a string; got an object" });
  });

  it("leaves the segment out when its cell is empty", () => {
    expect(recordFromFields(spec, { ...FIELDS, channel: "" }).segment).toBeUndefined();
  });
});

describe("recordColumns", () => {
  it("lists the mapping's columns, then every column a derivation reads, once each", () => {
    expect(recordColumns(spec)).toEqual(["paymentId", "createdAt", "accountRef", "channel", "amount", "shipping", "openedAt", "shipTo"]);
    expect([...recordValueColumns(spec)]).toEqual([
      ["amount", "number"],
      ["shipping", "number"],
      ["openedAt", "timestamp"],
      ["shipTo", "text"],
    ]);
  });
});
