import { describe, expect, it } from "vitest";
import { withInterval } from "./share";

describe("withInterval", () => {
  it("says a figure resting on decided payments only is exact instead of printing a zero-width interval", () => {
    expect(withInterval({ value: 0.6, low: 0.6, high: 0.6, standardError: 0, exact: true })).toBe("60.0 % (exact: every flag decided)");
  });

  it("adds decimals until a sampled interval's ends differ, so it never reads as zero-width", () => {
    expect(withInterval({ value: 1, low: 0.9996, high: 1, standardError: 0, exact: false })).toBe("100.00 % (99.96–100.00 %)");
    expect(withInterval({ value: 0.6, low: 0.5, high: 0.7, standardError: 0.05, exact: false })).toBe("60.0 % (50.0–70.0 %)");
  });

  it("says when no interval can be given", () => {
    expect(withInterval({ value: 0.4, low: null, high: null, standardError: 0, exact: false })).toBe("40.0 % (no interval: no audit sample)");
    expect(withInterval({ value: null, low: null, high: null, standardError: null, exact: false })).toBe("—");
  });
});
