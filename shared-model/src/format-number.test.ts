import { describe, expect, it } from "vitest";
import { formatForPeople, formatPercent } from "./format-number";

describe("formatForPeople", () => {
  it("writes whole numbers as they are and others with the asked significant digits, without trailing zeros", () => {
    expect(formatForPeople(1240)).toBe("1240");
    expect(formatForPeople(-48000)).toBe("-48000");
    expect(formatForPeople(0.0123456)).toBe("0.01235");
    expect(formatForPeople(2.5)).toBe("2.5");
    expect(formatForPeople(1234.56789, 6)).toBe("1234.57");
    expect(formatForPeople(0)).toBe("0");
  });

  it("switches to exponent form below 1e-4 and from 1e15 up, and writes non-finite values as JavaScript does", () => {
    expect(formatForPeople(0.0001)).toBe("0.0001");
    expect(formatForPeople(0.00001234, 3)).toBe("1.23e-5");
    expect(formatForPeople(999_999_999_999_999)).toBe("999999999999999");
    expect(formatForPeople(1.5e15)).toBe("1.500e+15");
    expect(formatForPeople(2.5e20 / 3)).toBe("8.333e+19");
    expect(formatForPeople(Number.POSITIVE_INFINITY)).toBe("Infinity");
    expect(formatForPeople(Number.NaN)).toBe("NaN");
  });
});

describe("formatPercent", () => {
  it("writes a fraction as a percentage with two decimals by default and says what is missing", () => {
    expect(formatPercent(0.0123)).toBe("1.23 %");
    expect(formatPercent(0.5, 1)).toBe("50.0 %");
    expect(formatPercent(Number.NaN)).toBe("n/a");
    expect(formatPercent(null, 1, "—")).toBe("—");
  });
});
