/**
 * Reasons as they travel in answers and queue messages. JSON has no Infinity or NaN, and the
 * model core can give an unbounded expected range in raw units (e.g. the inverse of a Yeo–Johnson
 * transform with a strongly negative λ runs to +∞ beyond its asymptote). Such numbers are sent as
 * `null`, meaning "no finite bound", rather than letting JSON.stringify turn them into null
 * silently or letting a schema refuse the whole review item.
 */
import type { Reason } from "../../../shared-model/src";
import type { WireReason } from "../contract/scoring";

/**
 * Maps the core's reasons to their wire form.
 *
 * @example
 * toWireReasons([{ feature: "shippingShare", actual: 0.6, expected: { center: Infinity, low: 0.47, high: Infinity }, standardizedResidual: -3.2 }])
 * // → [{ feature: "shippingShare", actual: 0.6, expected: { center: null, low: 0.47, high: null }, standardizedResidual: -3.2 }]
 */
export function toWireReasons(reasons: readonly Reason[]): WireReason[] {
  return reasons.map((r) => ({
    feature: r.feature,
    actual: r.actual,
    expected: {
      center: finiteOrNull(r.expected.center),
      low: finiteOrNull(r.expected.low),
      high: finiteOrNull(r.expected.high),
      ...(r.expected.outsideTraining ? { outsideTraining: r.expected.outsideTraining } : {}),
    },
    standardizedResidual: finiteOrNull(r.standardizedResidual),
  }));
}

function finiteOrNull(x: number): number | null {
  return Number.isFinite(x) ? x : null;
}
