import { describe, expect, it } from "vitest";
import { flagRateCheck } from "../../../shared-model/src/drift";
import { mulberry32, type SeededStream } from "../../../shared-model/src/seeded-stream";
import { byTestDepth } from "../../../shared-model/src/test-support";
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

  it("raises a flag-rate alarm in at most about 5 % of quiet weeks, where seven uncorrected 95 % checks raise one in about 30 %", () => {
    // Simulated quiet weeks: every day's flags ~ Binomial(scored, expected), scored 2,000–12,000.
    const stream = mulberry32(20261204);
    const expected = 0.01;
    const weeks = byTestDepth({ quick: 600, thorough: 4000 });
    let alarms = 0;
    let uncorrectedAlarms = 0;
    for (let w = 0; w < weeks; w++) {
      const volumes = Array.from({ length: 7 }, (_, d) => {
        const scored = 2000 + Math.floor(stream.uniform() * 10_000);
        return { day: `2026-12-0${d + 1}`, scored, flagged: binomial(stream, scored, expected) };
      });
      const rates = dayFlagRates(volumes, expected);
      if (refitReasons([], rates, 1, 28).length > 0) alarms++;
      if (volumes.some((v) => flagRateCheck(v.flagged, v.scored, expected).verdict !== "as-expected")) uncorrectedAlarms++;
      expect(rates[0].check!.confidence).toBeCloseTo(1 - 0.05 / 7, 12);
    }
    console.log(`quiet weeks with a flag-rate alarm: ${alarms}/${weeks} corrected, ${uncorrectedAlarms}/${weeks} with seven 95 % checks`);
    // Binomial(600, 0.05) exceeds 45 with probability below 0.1 %; the uncorrected rate is ≈ 0.30.
    expect(alarms / weeks).toBeLessThanOrEqual(0.075);
    expect(uncorrectedAlarms / weeks).toBeGreaterThan(0.2);
  });

  it("gives a reason for a shifted column, a flag rate out of its interval and an old model, and none otherwise", () => {
    const drift = [{ name: "amount", psi: 0.31, level: "shifted" as const, payments: 10, note: null }];
    const rates = dayFlagRates([{ day: "2026-12-01", scored: 263, flagged: 81 }], 0.25);
    const reasons = refitReasons(drift, rates, 35.2, 28);
    expect(reasons).toHaveLength(3);
    expect(reasons[0]).toBe("amount shifted (PSI 0.310 ≥ 0.25)");
    expect(reasons[1]).toContain("above the expected 25.00 %");
    expect(reasons[1]).toContain("95.00 % interval");
    expect(reasons[1]).toContain("one day tested, no correction needed");
    expect(reasons[2]).toBe("the model is 35 days old (refit after 28)");
    expect(refitReasons([{ ...drift[0], psi: 0.05, level: "stable" }], dayFlagRates([{ day: "d", scored: 1000, flagged: 250 }], 0.25), 3, 28)).toEqual([]);
  });
});

/** Binomial(n, p) by counting uniform draws below p (exact; fine for the few thousand trials here). */
function binomial(stream: SeededStream, n: number, p: number): number {
  let k = 0;
  for (let i = 0; i < n; i++) if (stream.uniform() < p) k++;
  return k;
}
