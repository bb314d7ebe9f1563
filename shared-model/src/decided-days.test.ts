import { describe, expect, it } from "vitest";
import { onFullyDecidedDays, type DecisionCell } from "./decided-days";
import { estimateRates } from "./estimates";
import { createRandom } from "./random";

describe("decisions on fully decided days", () => {
  it("keeps decided items of cells with nothing undecided, per model version and day", () => {
    const decided: DecisionCell[] = [
      { version: "m1", day: 1 },
      { version: "m1", day: 2 },
      { version: "m2", day: 2 },
      { version: "m1", day: 1 },
    ];
    expect(
      onFullyDecidedDays(decided, [
        { version: "m1", day: 2 },
        { version: "m1", day: 2 },
      ]),
    ).toEqual([true, false, true, true]);
    expect(onFullyDecidedDays(decided, [])).toEqual([true, true, true, true]);
  });

  it("removes the bias of frauds being decided first, which counting every decision shows (simulation, fixed seed)", () => {
    // Invented traffic: 10 days of 6,000 payments, 1 % fraud; the rule flags 70 % of fraud and 1 %
    // of legitimate payments, and 5 % of the rest are drawn into the audit sample. The first five
    // days are fully decided; on the last five the analysts have settled every fraud first and only
    // 10 % of the legitimate items. True precision of the rule: 0.007 / (0.007 + 0.0099).
    const truePrecision = (0.01 * 0.7) / (0.01 * 0.7 + 0.99 * 0.01);
    const random = createRandom(20261204);
    const all = { fraud: [] as number[], flagged: [] as number[], weights: [] as number[] };
    const adjusted = { fraud: [] as number[], flagged: [] as number[], weights: [] as number[] };
    const decidedCells: DecisionCell[] = [];
    const undecidedCells: DecisionCell[] = [];
    const rows: { fraud: number; flagged: number; weight: number }[] = [];
    for (let day = 0; day < 10; day++) {
      for (let k = 0; k < 6000; k++) {
        const fraud = random.next() < 0.01 ? 1 : 0;
        const flagged = random.next() < (fraud ? 0.7 : 0.01) ? 1 : 0;
        const audited = !flagged && random.next() < 0.05;
        if (!flagged && !audited) continue;
        const decided = day < 5 || fraud === 1 || random.next() < 0.1;
        const cell = { version: "m-sim", day };
        if (!decided) {
          undecidedCells.push(cell);
          continue;
        }
        decidedCells.push(cell);
        rows.push({ fraud, flagged, weight: flagged ? 1 : 20 });
      }
    }
    const keep = onFullyDecidedDays(decidedCells, undecidedCells);
    rows.forEach((r, i) => {
      for (const target of keep[i] ? [all, adjusted] : [all]) {
        target.fraud.push(r.fraud);
        target.flagged.push(r.flagged);
        target.weights.push(r.weight);
      }
    });
    const before = estimateRates(all).future.precision;
    const after = estimateRates(adjusted).future.precision;
    // Every decision counted: the half-decided days are fraud-rich, precision reads high and its
    // interval misses the truth.
    expect(before.low!).toBeGreaterThan(truePrecision);
    // Fully decided days only: the interval holds the truth.
    expect(after.low!).toBeLessThan(truePrecision);
    expect(after.high!).toBeGreaterThan(truePrecision);
    expect(Math.abs(after.value! - truePrecision)).toBeLessThan(Math.abs(before.value! - truePrecision));
  });
});
