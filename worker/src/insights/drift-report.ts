/**
 * The figures of the weekly report, from counts already read: PSI per model column and for d²
 * against the training reference, each day's flag rate against the expected rate, and the reasons
 * (if any) the live model is due for refit. Pure: the worker reads, this computes.
 */
import { bonferroniConfidence, driftEntriesFor, flagRateCheck } from "../../../shared-model/src";
import { formatPercent } from "../../../shared-model/src/format-number";
import type { TallyModel } from "./tally";
import type { BucketTotals, DayVolume } from "./traffic-queries";
import type { DayFlagRate, DriftEntry } from "../contract";
export type { DayFlagRate, DriftEntry };

/**
 * PSI and alert level per model column and for d² (alert levels 0.1 and 0.25, see `drift.ts`).
 * A column without traffic, or whose reference edges are all equal, gets a null PSI and a note
 * instead of failing the whole table.
 *
 * @example
 * driftEntries(live, totals) // [{ name: "amount", psi: 0.03, level: "stable", payments: 9120, note: null }, …]
 */
export function driftEntries(model: TallyModel, totals: BucketTotals): DriftEntry[] {
  return driftEntriesFor(model.artifact.reference, model.artifact.columns, totals);
}

/** Chance that a quiet window (every day at the expected rate) raises no flag-rate alarm. */
export const FLAG_RATE_FAMILY_CONFIDENCE = 0.95;

/**
 * Each day's flag rate, checked with a Wilson interval against `expectedRate` (the artifact's
 * `cutoff.flagRate`; null when the artifact does not state one). The days are tested together:
 * each interval is Bonferroni-corrected for the number of days checked, so a window whose every
 * day runs at the expected rate is called "above" or "below" on some day with probability at most
 * 5 % (seven uncorrected 95 % checks would do so in about 30 % of quiet weeks).
 *
 * @example
 * dayFlagRates([{ day: "2026-12-01", scored: 263, flagged: 81 }], 0.25)[0].check?.verdict // "above"
 */
export function dayFlagRates(volumes: readonly DayVolume[], expectedRate: number | null): DayFlagRate[] {
  const tested = volumes.filter((v) => v.scored > 0).length;
  const confidence = tested > 0 ? bonferroniConfidence(FLAG_RATE_FAMILY_CONFIDENCE, tested) : FLAG_RATE_FAMILY_CONFIDENCE;
  return volumes.map((v) => ({
    ...v,
    rate: v.scored > 0 ? v.flagged / v.scored : null,
    check: v.scored > 0 && expectedRate !== null ? flagRateCheck(v.flagged, v.scored, expectedRate, confidence) : null,
  }));
}

/**
 * Why the live model is due for refit: a column or the score "shifted", a day's flag rate outside
 * its (corrected, see {@link dayFlagRates}) interval, or the model older than `refitAfterDays`. Empty when none applies.
 *
 * @example
 * refitReasons(drift, rates, 35, 28) // ["the model is 35 days old (refit after 28)"]
 */
export function refitReasons(drift: readonly DriftEntry[], rates: readonly DayFlagRate[], ageDays: number, refitAfterDays: number): string[] {
  const reasons: string[] = [];
  for (const row of drift) {
    if (row.level === "shifted") reasons.push(`${row.name} shifted (PSI ${row.psi!.toFixed(3)} ≥ 0.25)`);
  }
  for (const day of rates) {
    const check = day.check;
    if (check && check.verdict !== "as-expected") {
      reasons.push(
        `flag rate on ${day.day} is ${check.verdict} the expected ${formatPercent(check.expectedRate)} (observed ${formatPercent(check.observedRate)}, ` +
          `${formatPercent(check.confidence)} interval ${formatPercent(check.low)}–${formatPercent(check.high)}, ${correctionText(rates.filter((r) => r.check).length)})`,
      );
    }
  }
  if (ageDays > refitAfterDays) reasons.push(`the model is ${Math.floor(ageDays)} days old (refit after ${refitAfterDays})`);
  return reasons;
}

function correctionText(tests: number): string {
  return tests === 1 ? "one day tested, no correction needed" : `Bonferroni-corrected for ${tests} daily tests`;
}
