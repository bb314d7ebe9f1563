import { describe, expect, it } from "vitest";
import { DAY_MS, HOUR_MS, MINUTE_MS, parseDuration, parseTimestamp, parseUtcOffset } from "./time";

describe("window durations", () => {
  it("reads minutes, hours and days as elapsed milliseconds", () => {
    expect(parseDuration("30m")).toBe(30 * MINUTE_MS);
    expect(parseDuration("24h")).toBe(DAY_MS);
    expect(parseDuration("7d")).toBe(7 * DAY_MS);
  });

  it("refuses zero, fractions, spaces, other units and a missing unit", () => {
    for (const text of ["0h", "1.5h", "24 h", "24hours", "2w", "24", "-1d", ""]) expect(parseDuration(text)).toBeNull();
  });
});

describe("UTC offsets", () => {
  it("reads ±HH:MM as minutes east of UTC", () => {
    expect(parseUtcOffset("+01:00")).toBe(60);
    expect(parseUtcOffset("-03:30")).toBe(-210);
    expect(parseUtcOffset("+14:00")).toBe(840);
  });

  it("refuses offsets past ±14:00 and malformed ones", () => {
    for (const text of ["+14:30", "+15:00", "01:00", "+1:00", "+01:60", "Z"]) expect(parseUtcOffset(text)).toBeNull();
  });
});

describe("ISO 8601 timestamps", () => {
  it("reads Z and offsets as the same instant", () => {
    const utc = Date.UTC(2026, 9, 1, 8, 15, 0);
    expect(parseTimestamp("2026-10-01T08:15:00Z")).toBe(utc);
    expect(parseTimestamp("2026-10-01T09:15:00+01:00")).toBe(utc);
    expect(parseTimestamp("2026-10-01T03:45:00-04:30")).toBe(utc);
    expect(parseTimestamp("2026-10-01 08:15Z")).toBe(utc);
  });

  it("keeps milliseconds exactly and truncates finer fractions", () => {
    expect(parseTimestamp("2026-10-01T00:52:35.056Z")).toBe(Date.UTC(2026, 9, 1, 0, 52, 35, 56));
    expect(parseTimestamp("2026-10-01T00:52:35.0569999Z")).toBe(Date.UTC(2026, 9, 1, 0, 52, 35, 56));
    expect(parseTimestamp("2026-10-01T00:52:35.9Z")).toBe(Date.UTC(2026, 9, 1, 0, 52, 35, 900));
  });

  it("reads a bare date as midnight UTC", () => {
    expect(parseTimestamp("2026-02-28")).toBe(Date.UTC(2026, 1, 28));
  });

  it("refuses a local time without an offset, impossible dates and other text", () => {
    for (const text of ["2026-10-01T08:15:00", "2026-02-29", "2026-13-01", "2026-10-01T24:00:00Z", "yesterday", "1790815955056"]) {
      expect(parseTimestamp(text)).toBeNull();
    }
    expect(parseTimestamp("2028-02-29")).toBe(Date.UTC(2028, 1, 29));
    expect(HOUR_MS).toBe(3_600_000);
  });
});
