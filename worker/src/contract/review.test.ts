import { describe, expect, it } from "vitest";
import { countsQuerySchema, decisionBodySchema, isCalendarDay, listQuerySchema, timeRange } from "./review";
import { utcDayStart } from "../review/settings";

describe("review inputs", () => {
  it("turns a day range into a half-open range that includes the whole last day", () => {
    expect(timeRange("2026-12-01", "2026-12-01")).toEqual({ fromMs: Date.UTC(2026, 11, 1), toMs: Date.UTC(2026, 11, 2) });
    expect(timeRange("2026-12-01T10:00:00Z", "2026-12-01T11:30:00Z")).toEqual({
      fromMs: Date.UTC(2026, 11, 1, 10),
      toMs: Date.UTC(2026, 11, 1, 11, 30),
    });
    expect(timeRange(undefined, undefined)).toEqual({ fromMs: undefined, toMs: undefined });
  });

  it("knows which days exist: month 1 to 12, the month's own length, 29 February in leap years only", () => {
    for (const day of ["2026-01-31", "2026-02-28", "2024-02-29", "2000-02-29", "2026-04-30", "2026-12-31", "2026-12-01T10:00:00Z"]) expect(isCalendarDay(day), day).toBe(true);
    for (const day of ["2026-13-45", "2026-02-30", "2026-00-10", "2026-04-31", "2025-02-29", "1900-02-29", "2026-01-00", "20260101", "tomorrow"])
      expect(isCalendarDay(day), day).toBe(false);
  });

  it("refuses an impossible day or instant in from and to, which Date.parse would roll over or make NaN", () => {
    for (const query of [{ from: "2026-13-45" }, { to: "2026-02-30" }, { from: "2026-02-30T10:00:00Z" }]) {
      const parsed = countsQuerySchema.safeParse(query);
      expect(parsed.success, JSON.stringify(query)).toBe(false);
      expect(parsed.error?.issues[0].path).toEqual(Object.keys(query));
    }
  });

  it("accepts a note of exactly 2,000 characters and refuses 2,001", () => {
    expect(decisionBodySchema.safeParse({ outcome: "fraud", note: "n".repeat(2000) }).success).toBe(true);
    const refused = decisionBodySchema.safeParse({ outcome: "fraud", note: "n".repeat(2001) });
    expect(refused.success).toBe(false);
    expect(refused.error?.issues[0].message).toBe("must be at most 2000 characters");
  });

  it("fills the list defaults: open items by priority, 50 a page", () => {
    expect(listQuerySchema.parse({})).toEqual({ state: "open", sort: "priority", limit: 50 });
    expect(listQuerySchema.parse({ limit: "200" }).limit).toBe(200);
    expect(listQuerySchema.safeParse({ limit: "201" }).success).toBe(false);
  });

  it("starts the day at UTC midnight", () => {
    expect(utcDayStart(Date.UTC(2026, 11, 1, 23, 59, 59, 999))).toBe(Date.UTC(2026, 11, 1));
  });
});
