/**
 * Small text helpers for the model page: shares as percentages and estimates with their interval.
 * Everything returns text; nothing here builds markup.
 */
import type { Estimate } from "../../../../shared-model/src/estimates";
import { formatPercent } from "../../../../shared-model/src/format-number";

/** A share as a percentage with one decimal ("—" when unknown). @example percent(0.0412) // "4.1 %" */
export function percent(share: number | null | undefined, digits = 1): string {
  return formatPercent(share, digits, "—");
}

/**
 * An estimate with its interval; a figure resting on decided payments only says it is exact
 * rather than printing a zero-width interval, and one whose interval cannot be given says so.
 * @example withInterval({ value: 0.6, low: 0.5, high: 0.7, standardError: 0.05, exact: false }) // "60.0 % (50.0–70.0 %)"
 * @example withInterval({ value: 0.6, low: 0.6, high: 0.6, standardError: 0, exact: true }) // "60.0 % (exact: every flag decided)"
 */
export function withInterval(estimate: Estimate): string {
  if (estimate.value === null) return "—";
  if (estimate.exact) return `${percent(estimate.value)} (exact: every flag decided)`;
  if (estimate.low === null || estimate.high === null) return `${percent(estimate.value)} (no interval: no audit sample)`;
  // A sampled interval is never zero-width; one decimal must not make it look so (99.96–100.0 %).
  let digits = 1;
  while (digits < 4 && (estimate.low * 100).toFixed(digits) === (estimate.high * 100).toFixed(digits)) digits++;
  return `${percent(estimate.value, digits)} (${(estimate.low * 100).toFixed(digits)}–${percent(estimate.high, digits)})`;
}

/** A d² value with two decimals. @example distance(24.517) // "24.52" */
export function distance(value: number): string {
  return Number.isFinite(value) ? value.toFixed(2) : "—";
}
