import { describe, expect, it } from "vitest";
import { kernelScratch, mahalanobisSqPacked, packQuadraticForm } from "./quadratic-form";
import { mahalanobisSq, Scorer, compileModel } from "./score";
import { fitted, sealedFixture, spdFrom } from "./test-support";

describe("packed quadratic form", () => {
  // Its agreement with the row-major kernel and the naive loop on generated cases is pinned in
  // score.test.ts ("both kernels …").

  it("lays out the group triangle, then four rows per later column, then the remainder rows", () => {
    // Λ_ij = 10 i + j on the upper triangle (symmetric), n = 6: one group of four and two rows.
    const n = 6;
    const precision = new Float64Array(n * n);
    for (let i = 0; i < n; i++) for (let j = i; j < n; j++) precision[i * n + j] = precision[j * n + i] = 10 * i + j;
    const { packed } = packQuadraticForm(precision, new Float64Array(n), n);
    expect(packed).toEqual([
      0,
      2,
      4,
      6,
      11,
      24,
      26,
      22,
      46,
      33, // triangle of rows 0–3, off-diagonals doubled
      8,
      28,
      48,
      68, // column 4: rows 0, 1, 2, 3
      10,
      30,
      50,
      70, // column 5
      44,
      90, // row 4: Λ44, 2Λ45
      55, // row 5
    ]);
  });

  it("fills the scratch with x − μ, propagates NaN and never returns a negative d²", () => {
    const n = 5;
    const precision = spdFrom([0.3, -0.2, 0.5, 0.1, 0.0, 0.4, -0.3, 0.2, 0.6, 0.1, 0.2, -0.5, 0.1, 0.3, 0.0, 0.7, 0.1, 0.2, 0.3, 0.4, 0.5, 0.1, 0.2, 0.3, 0.4], n, 0.2);
    const mean = Float64Array.of(1, 2, 3, 4, 5);
    const form = packQuadraticForm(precision, mean, n);
    const diff = kernelScratch(n);
    mahalanobisSqPacked(form, Float64Array.of(1.5, 2, 2, 4, 6), diff);
    expect(diff).toEqual([0.5, 0, -1, 0, 1]);
    expect(mahalanobisSqPacked(form, mean, diff)).toBe(0);
    expect(mahalanobisSqPacked(form, Float64Array.of(1, Number.NaN, 3, 4, 5), diff)).toBeNaN();
  });

  it("refuses a precision or mean of the wrong size, naming both", () => {
    expect(() => packQuadraticForm(new Float64Array(8), new Float64Array(3), 3)).toThrow(/precision must be 3×3 and mean of length 3. Actual: 8 and 3/);
  });

  it("is what the Scorer uses: its d² equals the row-major kernel's on every segment", async () => {
    // Seven columns (one group of four and three remainder rows), a pooled and a "web" segment.
    const names = ["a", "b", "c", "d", "e", "f", "g"];
    const segment = (shift: number) => ({
      mean: names.map((_, i) => i + shift),
      covariance: spdFrom(
        Array.from({ length: 49 }, (_, k) => Math.sin(k + shift)),
        7,
        0.5,
      ),
    });
    const model = compileModel(await sealedFixture({ features: names.map((name) => fitted(name, "none")), segments: { "*": segment(0), web: segment(3) } }));
    const scorer = new Scorer(model);
    for (const seg of model.segments.values()) {
      const x = Float64Array.from({ length: model.n }, (_, i) => seg.mean[i] + (i % 2 === 0 ? 1.5 : -0.7));
      const want = mahalanobisSq(seg.precision, seg.mean, x, seg.n, new Float64Array(seg.n));
      expect(scorer.scoreTransformed(x, seg).mahalanobisSq).toBeCloseTo(want, 10);
    }
  });
});
