import { describe, expect, it } from "vitest";
import { countOf, formatCount } from "./format-count";

describe("formatCount", () => {
  it("groups thousands with commas whatever the machine's locale", () => {
    expect(formatCount(0)).toBe("0");
    expect(formatCount(999)).toBe("999");
    expect(formatCount(48_000)).toBe("48,000");
    expect(formatCount(1_234_567)).toBe("1,234,567");
  });

  it("keeps the sign and cuts a fraction to its whole part", () => {
    expect(formatCount(-1_234_567)).toBe("-1,234,567");
    expect(formatCount(12_000.9)).toBe("12,000");
  });
});

describe("countOf", () => {
  it("puts the noun in the plural unless the count is one", () => {
    expect(countOf(1, "row")).toBe("1 row");
    expect(countOf(0, "row")).toBe("0 rows");
    expect(countOf(12_000, "linear dependency", "linear dependencies")).toBe("12,000 linear dependencies");
  });
});
