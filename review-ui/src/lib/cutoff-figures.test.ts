import { describe, expect, it } from "vitest";
import { buildTable, cutoffView, sliderMax } from "./cutoff-figures";

// Invented labelled set: four flags (weight 1) and two audit draws standing for 50 payments each.
const labels = {
  mahalanobisSq: [40, 35, 31, 28, 12, 6],
  fraud: [1, 1, 0, 1, 1, 0],
  weight: [1, 1, 1, 1, 50, 50],
};

describe("cutoff figures", () => {
  it("counts weighted true and false positives above the cutoff, and recall over all weighted fraud", () => {
    const table = buildTable(labels);
    if (typeof table === "string") throw new Error(table);
    const view = cutoffView(table, labels, 30, 1000);
    // Flagged at d² > 30: 40 (fraud), 35 (fraud), 31 (legitimate) → TP 2, FP 1; missed fraud 28 (1) + 12 (50).
    expect([view.point.truePositives, view.point.falsePositives, view.point.falseNegatives]).toEqual([2, 1, 51]);
    expect(view.point.precision).toBeCloseTo(2 / 3, 12);
    expect(view.estimates.recall.value).toBeCloseTo(2 / 53, 12);
    expect(view.expectedFlagsPerDay).toBeCloseTo((3 / 104) * 1000, 9);
  });

  it("moves the figures when the cutoff moves: a lower cutoff flags more and recalls more", () => {
    const table = buildTable(labels);
    if (typeof table === "string") throw new Error(table);
    const strict = cutoffView(table, labels, 36, 1000);
    const loose = cutoffView(table, labels, 10, 1000);
    expect(loose.expectedFlagsPerDay!).toBeGreaterThan(strict.expectedFlagsPerDay!);
    expect(loose.estimates.recall.value!).toBeGreaterThan(strict.estimates.recall.value!);
  });

  it("says why there is no table without labels or without any fraud", () => {
    expect(buildTable({ mahalanobisSq: [], fraud: [], weight: [] })).toContain("No decisions");
    expect(buildTable({ mahalanobisSq: [3, 4], fraud: [0, 0], weight: [1, 1] })).toContain("No decision is fraud");
  });

  it("sets the slider's top a tenth beyond the largest labelled score or the live cutoff", () => {
    expect(sliderMax([3, 40], 20)).toBe(44);
    expect(sliderMax([3], 20)).toBe(22);
  });
});
