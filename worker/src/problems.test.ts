import { describe, expect, test } from "vitest";
import { describeValue, fieldPath } from "./problems";

describe("fieldPath", () => {
  test("joins prefixes, names and indexes, quoting names that are not plain identifiers", () => {
    expect(fieldPath("", ["features", "amount"])).toBe("features.amount");
    expect(fieldPath("payments[3].", ["features", "amount"])).toBe("payments[3].features.amount");
    expect(fieldPath("", ["payments", 2, "transactionId"])).toBe("payments[2].transactionId");
    expect(fieldPath("", ["features", "odd name"])).toBe('features["odd name"]');
    expect(fieldPath("", [])).toBe("body");
  });
});

describe("describeValue", () => {
  test("says what came, briefly", () => {
    expect(describeValue(undefined)).toBe("nothing");
    expect(describeValue(null)).toBe("null");
    expect(describeValue("12.5")).toBe('string "12.5"');
    expect(describeValue(Infinity)).toBe("Infinity (a JSON number beyond ±1.8e308)");
    expect(describeValue(Number.NaN)).toBe("NaN");
    expect(describeValue([1, 2])).toBe("an array of 2");
    expect(describeValue(7)).toBe("number 7");
    expect(describeValue("x".repeat(50))).toBe(`string "${"x".repeat(40)}…" (50 characters)`);
  });
});
