import { describe, expect, it } from "vitest";
import { dayFlagRates, driftEntries, refitReasons } from "./drift-report";
import type { TallyModel } from "./tally";

const model: TallyModel = {
  version: "m-test-1",
  artifact: {
    columns: ["amount", "flat"],
    features: [
      { name: "amount", transform: "none", columns: ["amount"] },
      { name: "flat", transform: "none", columns: ["flat"] },
    ],
    reference: { columnEdges: [[1, 2, 3, 4, 5, 6, 7, 8, 9], []], scoreEdges: [1, 2, 3, 4, 5, 6, 7, 8, 9] },
  },
};
const even = new Array(10).fill(100);

describe("the weekly report's figures", () => {
  it("gives PSI 0 and level stable for traffic spread like training, and a note instead of a PSI for a column without edges", () => {
    const rows = driftEntries(model, { columns: [even, [1000]], score: even, payments: 1000 });
    expect(rows[0]).toMatchObject({ name: "amount", level: "stable", payments: 1000, note: null });
    expect(rows[0].psi).toBeCloseTo(0, 12);
    expect(rows[1].psi).toBeNull();
    expect(rows[1].note).toBe("the artifact stores no reference edges for it");
    expect(rows[2].name).toBe("mahalanobisSq");
  });

  it("notes a column without traffic rather than failing the table", () => {
    const zero = new Array(10).fill(0);
    const rows = driftEntries(model, { columns: [zero, [0]], score: zero, payments: 0 });
    expect([rows[0], rows[2]].every((r) => r.psi === null && r.note === "no payments counted in the window")).toBe(true);
  });

  it("checks each day's flag rate against the expected one and skips the check when none is stored", () => {
    // Wilson interval of 81 / 263 is 0.2553–0.3662 (drift.ts example): 0.25 lies below it.
    expect(dayFlagRates([{ day: "2026-12-01", scored: 263, flagged: 81 }], 0.25)[0].check?.verdict).toBe("above");
    expect(dayFlagRates([{ day: "2026-12-01", scored: 263, flagged: 81 }], null)[0].check).toBeNull();
  });

  it("gives a reason for a shifted column, a flag rate out of its interval and an old model, and none otherwise", () => {
    const drift = [{ name: "amount", psi: 0.31, level: "shifted" as const, payments: 10, note: null }];
    const rates = dayFlagRates([{ day: "2026-12-01", scored: 263, flagged: 81 }], 0.25);
    const reasons = refitReasons(drift, rates, 35.2, 28);
    expect(reasons).toHaveLength(3);
    expect(reasons[0]).toBe("amount shifted (PSI 0.310 ≥ 0.25)");
    expect(reasons[1]).toContain("above the expected 25.00 %");
    expect(reasons[2]).toBe("the model is 35 days old (refit after 28)");
    expect(refitReasons([{ ...drift[0], psi: 0.05, level: "stable" }], dayFlagRates([{ day: "d", scored: 1000, flagged: 250 }], 0.25), 3, 28)).toEqual([]);
  });
});
