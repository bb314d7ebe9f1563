import { describe, expect, it } from "vitest";
import { describeReason, formatAge, formatDistanceFromExpected, formatLog10Tail, formatTail, formatValue } from "./format";

describe("plain-words formatting", () => {
  it("words a reason the way an analyst reads it", () => {
    const text = describeReason({ feature: "amount", actual: 1240, expected: { center: 95, low: 60.4, high: 140.2 }, standardizedResidual: 6.2 });
    expect(text).toBe("amount 1,240 — expected 60.4–140 given the other features");
  });

  it("says a range lies below or above anything seen in training instead of showing it clipped to a point", () => {
    const reason = (outsideTraining?: "below" | "above") =>
      describeReason({ feature: "shippingShare", actual: 0.41, expected: { center: 0.008, low: 0.008, high: 0.008, outsideTraining }, standardizedResidual: -4.2 });
    expect(reason("below")).toBe("shippingShare 0.41 — expected below anything seen in training given the other features");
    expect(reason("above")).toBe("shippingShare 0.41 — expected above anything seen in training given the other features");
    // Stored before the side was kept: no "0.008–0.008".
    expect(reason()).toBe("shippingShare 0.41 — expected at the edge of what training saw (0.008) given the other features");
  });

  it("gives the distance from the expected value in standard deviations, whichever side it lies", () => {
    expect(formatDistanceFromExpected(5.43)).toBe("5.4 SD from expected");
    expect(formatDistanceFromExpected(-5.43)).toBe("5.4 SD from expected");
    expect(formatDistanceFromExpected(null)).toBe("");
  });

  it("words a range reaching below zero with 'to' rather than a dash", () => {
    const text = describeReason({ feature: "hoursSincePrevious", actual: 0.0192, expected: { center: -0.998, low: -1, high: -0.995 }, standardizedResidual: 5.4 });
    expect(text).toBe("hoursSincePrevious 0.0192 — expected \u22121 to \u22120.995 given the other features");
  });

  it("words an unbounded end (null from an older model) as 'up to' or 'or more'", () => {
    const reason = (low: number | null, high: number | null) =>
      describeReason({ feature: "shippingShare", actual: 0.41, expected: { center: 0.12, low, high }, standardizedResidual: 3.1 });
    expect(reason(0.05, null)).toBe("shippingShare 0.41 — expected 0.05 or more given the other features");
    expect(reason(null, 0.3)).toBe("shippingShare 0.41 — expected up to 0.3 given the other features");
    expect(reason(null, null)).toBe("shippingShare 0.41 — expected any value given the other features");
  });

  it("writes negative values with a true minus sign so ranges stay readable", () => {
    expect(formatValue(-0.169)).toBe("\u22120.169");
    expect(formatValue(0)).toBe("0");
    expect(formatValue(Number.NaN)).toBe("—");
  });

  it("gives tail probabilities as odds, with a superscript power for the very rare", () => {
    expect(formatTail(0.25)).toBe("25 %");
    expect(formatTail(0.00021)).toBe("1 in 4,800");
    expect(formatTail(2e-10)).toBe("1 in 5.0 × 10⁹");
    // Capped: a Gaussian tail that far out invites more trust than the model deserves, and tails
    // that underflow a double (0, subnormal) must not print as "1 in Infinity × 10NaN".
    expect(formatTail(4.4e-17)).toBe("rarer than 1 in 10¹⁵");
    expect(formatTail(0)).toBe("rarer than 1 in 10¹⁵");
    expect(formatTail(1e-320)).toBe("rarer than 1 in 10¹⁵");
  });

  it("gives how rare from the log tail probability, the same as from the probability, capped where it underflows", () => {
    for (const p of [0.25, 0.00021, 2e-10, 4.4e-17]) expect(formatLog10Tail(Math.log10(p))).toBe(formatTail(p));
    expect(formatLog10Tail(-434.2)).toBe("rarer than 1 in 10¹⁵");
    expect(formatLog10Tail(null)).toBe("rarer than 1 in 10¹⁵");
  });

  it("gives ages in the largest whole unit", () => {
    const now = Date.parse("2026-12-03T12:00:00Z");
    expect(formatAge("2026-12-03T11:15:00Z", now)).toBe("45 min");
    expect(formatAge("2026-12-03T02:00:00Z", now)).toBe("10 h");
    expect(formatAge("2026-11-28T12:00:00Z", now)).toBe("5 d");
  });
});
