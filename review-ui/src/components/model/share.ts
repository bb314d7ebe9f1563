/**
 * Small text helpers for the model page: shares as percentages and estimates with their interval.
 * Everything returns text; nothing here builds markup.
 */
import type { Estimate } from "../../../../shared-model/src/estimates";

/** A share as a percentage with one decimal ("—" when unknown). @example percent(0.0412) // "4.1 %" */
export function percent(share: number | null | undefined, digits = 1): string {
  return share === null || share === undefined || !Number.isFinite(share) ? "—" : `${(share * 100).toFixed(digits)} %`;
}

/** An estimate with its interval. @example withInterval({ value: 0.6, low: 0.5, high: 0.7, standardError: 0.05 }) // "60.0 % (50.0–70.0 %)" */
export function withInterval(estimate: Estimate): string {
  if (estimate.value === null) return "—";
  if (estimate.low === null || estimate.high === null) return percent(estimate.value);
  return `${percent(estimate.value)} (${(estimate.low * 100).toFixed(1)}–${percent(estimate.high)})`;
}

/** A d² value with two decimals. @example distance(24.517) // "24.52" */
export function distance(value: number): string {
  return Number.isFinite(value) ? value.toFixed(2) : "—";
}
