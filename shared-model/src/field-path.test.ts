import { describe, expect, it } from "vitest";
import { formatFieldPath, joinFieldPath } from "./field-path";

describe("field paths", () => {
  it("writes indexes in brackets and plain names after a dot, with no dot at the start", () => {
    expect(formatFieldPath(["payments", 2, "features", "amount"])).toBe("payments[2].features.amount");
    expect(formatFieldPath([0, "transform"])).toBe("[0].transform");
  });

  it("quotes a name that is not plain, so a path stays readable and unambiguous", () => {
    expect(joinFieldPath("segments", "card not present")).toBe('segments["card not present"]');
    expect(joinFieldPath("features", "a.b")).toBe('features["a.b"]');
    expect(joinFieldPath("features", "ship-km")).toBe("features.ship-km");
  });

  it("continues from a base and gives the base back for the empty path", () => {
    expect(formatFieldPath(["amount"], "payments[0]")).toBe("payments[0].amount");
    expect(formatFieldPath([], "cutoff")).toBe("cutoff");
    expect(formatFieldPath([])).toBe("");
  });
});
