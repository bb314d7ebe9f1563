import { describe, expect, test } from "vitest";
import { toWireReasons } from "./wire-reasons";

describe("toWireReasons", () => {
  test("sends an unbounded expected range as null and keeps finite numbers exactly", () => {
    const wire = toWireReasons([
      { feature: "shippingShare", actual: 0.5991, expected: { center: Infinity, low: 0.47, high: Infinity }, standardizedResidual: -3.25 },
      { feature: "amount", actual: 2450, expected: { center: 61.2, low: 24.9, high: 150.3 }, standardizedResidual: Number.NaN },
    ]);
    expect(wire).toEqual([
      { feature: "shippingShare", actual: 0.5991, expected: { center: null, low: 0.47, high: null }, standardizedResidual: -3.25 },
      { feature: "amount", actual: 2450, expected: { center: 61.2, low: 24.9, high: 150.3 }, standardizedResidual: null },
    ]);
    expect(JSON.parse(JSON.stringify(wire))).toEqual(wire);
  });

  test("keeps the side of a range that lies wholly outside training, and adds none where there is none", () => {
    const [outside, inside] = toWireReasons([
      { feature: "shippingShare", actual: 0.41, expected: { center: 0.008, low: 0.008, high: 0.008, outsideTraining: "below" }, standardizedResidual: -4.2 },
      { feature: "amount", actual: 80, expected: { center: 61.2, low: 24.9, high: 150.3 }, standardizedResidual: 0.4 },
    ]);
    expect(outside.expected).toEqual({ center: 0.008, low: 0.008, high: 0.008, outsideTraining: "below" });
    expect(inside.expected).not.toHaveProperty("outsideTraining");
  });
});
