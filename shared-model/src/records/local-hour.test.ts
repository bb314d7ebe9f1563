import { describe, expect, it } from "vitest";
import { isKnownTimeZone, localHourAtOffset, localHourInZone } from "./local-hour";

describe("local hour at a fixed offset", () => {
  it("adds the offset and wraps at midnight, minutes and seconds as a fraction", () => {
    // 23:30 UTC is 00:30 at +01:00; 00:52:35.056 UTC is 01:52:35.056 → 1 + 52/60 + 35.056/3600.
    expect(localHourAtOffset(Date.UTC(2026, 0, 1, 23, 30), 60)).toBe(0.5);
    expect(localHourAtOffset(Date.UTC(2026, 9, 1, 0, 52, 35, 56), 60)).toBeCloseTo(1 + 52 / 60 + 35.056 / 3600, 12);
    // 02:15 UTC is 22:45 the day before at −03:30.
    expect(localHourAtOffset(Date.UTC(2026, 0, 2, 2, 15), -210)).toBe(22.75);
  });

  it("stays in [0, 24) before the epoch too", () => {
    expect(localHourAtOffset(Date.UTC(1969, 11, 31, 23, 0), 0)).toBe(23);
  });
});

describe("local hour in an IANA zone", () => {
  // EU summer time starts and ends at 01:00 UTC on the last Sunday of March and October (EU
  // Directive 2000/84/EC): in 2026 on 29 March and 25 October. Central European Time is +01:00,
  // summer time +02:00.
  it("follows Europe/Berlin across the spring change: 00:30 UTC is 01:30 local, 01:30 UTC is 03:30", () => {
    expect(localHourInZone(Date.UTC(2026, 2, 29, 0, 30), "Europe/Berlin")).toBe(1.5);
    expect(localHourInZone(Date.UTC(2026, 2, 29, 0, 59, 59, 999), "Europe/Berlin")).toBeCloseTo(1 + 59 / 60 + 59.999 / 3600, 12);
    expect(localHourInZone(Date.UTC(2026, 2, 29, 1, 0), "Europe/Berlin")).toBe(3);
    expect(localHourInZone(Date.UTC(2026, 2, 29, 1, 30), "Europe/Berlin")).toBe(3.5);
  });

  it("follows Europe/Berlin across the autumn change: 00:30 and 01:30 UTC are both 02:30 local", () => {
    expect(localHourInZone(Date.UTC(2026, 9, 25, 0, 30), "Europe/Berlin")).toBe(2.5);
    expect(localHourInZone(Date.UTC(2026, 9, 25, 1, 30), "Europe/Berlin")).toBe(2.5);
    expect(localHourInZone(Date.UTC(2026, 9, 25, 12, 0), "Europe/Berlin")).toBe(13);
  });

  // US daylight time starts at 02:00 local on the second Sunday of March (Energy Policy Act of
  // 2005): 8 March 2026, 07:00 UTC; Eastern Standard Time is −05:00, daylight time −04:00.
  it("follows America/New_York: one millisecond before 07:00 UTC is 01:59:59.999, 07:00 UTC is 03:00", () => {
    expect(localHourInZone(Date.UTC(2026, 2, 8, 7, 0) - 1, "America/New_York")).toBeCloseTo(2 - 0.001 / 3600, 12);
    expect(localHourInZone(Date.UTC(2026, 2, 8, 7, 0), "America/New_York")).toBe(3);
  });

  it("handles a zone with a half-hour offset and changes off the UTC hour (Australia/Lord_Howe)", () => {
    // Lord Howe Island: +10:30 standard, +11:00 summer; summer time in 2026 ends at 02:00 local
    // on 5 April (from memory), i.e. 15:00 UTC on 4 April.
    expect(localHourInZone(Date.UTC(2026, 3, 4, 14, 45), "Australia/Lord_Howe")).toBe(1.75);
    expect(localHourInZone(Date.UTC(2026, 3, 4, 15, 15), "Australia/Lord_Howe")).toBe(1.75);
  });

  it("knows IANA zones and refuses made-up ones", () => {
    expect(isKnownTimeZone("Europe/Berlin")).toBe(true);
    expect(isKnownTimeZone("UTC")).toBe(true);
    expect(isKnownTimeZone("Mars/Olympus_Mons")).toBe(false);
    expect(() => localHourInZone(0, "Mars/Olympus_Mons")).toThrow(RangeError);
  });
});
