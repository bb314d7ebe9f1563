import { describe, expect, it } from "vitest";
import { formatCount, formatForPeople, formatPercent, parseStrictNumber, whyNotANumber } from "./numbers";

describe("strict number parsing", () => {
  it("accepts plain decimals with optional sign, fraction and exponent", () => {
    expect(parseStrictNumber("0")).toBe(0);
    expect(parseStrictNumber("-0.5")).toBe(-0.5);
    expect(parseStrictNumber("+3")).toBe(3);
    expect(parseStrictNumber("1e3")).toBe(1000);
    expect(parseStrictNumber("2.5E-2")).toBe(0.025);
    expect(parseStrictNumber(".5")).toBe(0.5);
    expect(parseStrictNumber("5.")).toBe(5);
  });

  it("refuses what Number() would quietly accept or half-read", () => {
    for (const text of ["", " ", " 12", "12 ", "12abc", "0x10", "0b1", "0o7", "1_000", "1,5", "Infinity", "-Infinity", "NaN", "e3", ".", "-", "1e", "1e999"]) {
      expect(parseStrictNumber(text), JSON.stringify(text)).toBeNull();
    }
  });

  it("explains each kind of refusal in words", () => {
    expect(whyNotANumber("12")).toBeNull();
    expect(whyNotANumber("")).toBe("the cell is empty; a number is required");
    expect(whyNotANumber("  ")).toBe("'  ' is blank; a number is required");
    expect(whyNotANumber("inf")).toBe("'inf' is not a finite number");
    expect(whyNotANumber(" 12")).toBe("' 12' has spaces around the number; write the number alone");
    expect(whyNotANumber("1e400")).toBe("'1e400' is too large to be a finite number");
    expect(whyNotANumber("abc")).toBe("'abc' is not a number");
  });
});

describe("number formatting for people", () => {
  it("keeps whole numbers and rounds others to significant digits", () => {
    expect(formatForPeople(1240)).toBe("1240");
    expect(formatForPeople(61.234, 3)).toBe("61.2");
    expect(formatForPeople(0.0123456)).toBe("0.01235");
    expect(formatForPeople(1.5e-7)).toBe("1.500e-7");
    expect(formatForPeople(Number.POSITIVE_INFINITY)).toBe("Infinity");
  });

  it("groups thousands and writes percentages with two decimals", () => {
    expect(formatCount(0)).toBe("0");
    expect(formatCount(999)).toBe("999");
    expect(formatCount(1234567)).toBe("1,234,567");
    expect(formatCount(-12000)).toBe("-12,000");
    expect(formatPercent(0.0123)).toBe("1.23 %");
    expect(formatPercent(Number.NaN)).toBe("n/a");
  });
});
