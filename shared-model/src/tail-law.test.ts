import { describe, expect, it } from "vitest";
import { chiSquareSurvival, logFSurvival } from "./distributions";
import { fitModel } from "./fit";
import { compileModel, Scorer } from "./score";
import { mulberry32 } from "./seeded-stream";
import { logTailProbability, predictiveTail, tailFigures } from "./tail-law";
import { byTestDepth, correlatedGaussianRows, fitted, rowSource, sealedFixture } from "./test-support";

const N_COLUMNS = 8;
const features = Array.from({ length: N_COLUMNS }, (_, j) => ({ name: `x${j}`, transform: "none" as const }));

async function fitClassical(rows: Float64Array[], cutoffRate = 0.01) {
  return fitModel(rowSource(rows), { features, shape: "full", estimator: "classical", segmentBy: null, cutoffRate, createdAt: "2026-12-04T00:00:00Z" });
}

describe("logFSurvival", () => {
  it("matches SciPy's log survival function of F, and mpmath's incomplete beta where the probability underflows", () => {
    // SciPy 1.17.1: scipy.stats.f.logsf(x, d1, d2) / ln 10.
    const scipy: [number, number, number, number][] = [
      [3.1, 8, 92, -2.415815439798481],
      [40, 8, 192, -36.30179382070441],
      [200, 8, 292, -112.96875985038078],
      [1e4, 8, 192, -246.40727154546246],
      [1e6, 2, 50, -115.05177121385736],
      [1e20, 1, 10, -95.60889941585826],
    ];
    for (const [x, d1, d2, log10] of scipy) expect(logFSurvival(x, d1, d2) / Math.LN10, `${x} ${d1} ${d2}`).toBeCloseTo(log10, 10);
    // SciPy's logsf is −inf here; mpmath 1.3.0 at 40 digits: log10(betainc(d2/2, d1/2, 0, d2/(d2 + d1·x), regularized=True)).
    expect(logFSurvival(1e12, 8, 192) / Math.LN10).toBeCloseTo(-1014.3042390425447, 9);
    expect(logFSurvival(1e9, 8, 292) / Math.LN10).toBeCloseTo(-1080.1726300827699, 9);
    expect(logFSurvival(0, 8, 192)).toBe(0);
    expect(logFSurvival(Infinity, 8, 192)).toBe(-Infinity);
  });
});

describe("tailFigures", () => {
  it("reads χ² for a segment without a stored law, as artifacts written before the law was stored do", async () => {
    const artifact = await sealedFixture({ features: [fitted("a", "none"), fitted("b", "none")], segments: { "*": { mean: [0, 0], covariance: [1, 0, 0, 1], rows: 40 } } });
    const result = new Scorer(compileModel(artifact)).score([2, 1]);
    expect(artifact.segments["*"].tailLaw).toBeUndefined();
    expect(result.tailProbability).toBe(chiSquareSurvival(5, 2));
    expect(result.log10TailProbability).toBe(Math.log10(chiSquareSurvival(5, 2)));
  });

  it("gives the predictive law's tail and a finite log far past the smallest double", () => {
    const segment = { n: 8, rows: 300, tailLaw: "predictive" as const };
    // 8·301/292 · F⁻¹(0.99; 8, 292) = 21.2149 is the predictive 1 % point (SciPy 1.17.1: 8*301/292*f.isf(0.01, 8, 292)).
    expect(tailFigures(21.214877340227822, segment).tailProbability).toBeCloseTo(0.01, 10);
    expect(predictiveTail(21.214877340227822, 8, 300)).toBeCloseTo(0.01, 10);
    const far = tailFigures(1e9, segment);
    expect(far.tailProbability).toBe(0);
    expect(Number.isFinite(far.log10TailProbability)).toBe(true);
    expect(far.log10TailProbability).toBeCloseTo(logFSurvival((1e9 * 292) / (8 * 301), 8, 292) / Math.LN10, 9);
    // A segment with no more rows than columns cannot read the predictive law.
    expect(logTailProbability(9, { n: 8, rows: 8, tailLaw: "predictive" })).toBe(logTailProbability(9, { n: 8, rows: 8 }));
  });
});

describe("tail probabilities of a small segment", () => {
  it("are stored with the law in the artifact and named in the fit output", async () => {
    const small = await fitClassical(correlatedGaussianRows(mulberry32(5), 300));
    expect(small.artifact.segments["*"].tailLaw).toBe("predictive");
    expect(small.artifact.cutoff.law).toBe("predictive");
    expect(small.report.lines.join("\n")).toContain("tail probabilities: the predictive law of a new payment");
    const large = await fitClassical(correlatedGaussianRows(mulberry32(6), 2000));
    expect(large.artifact.segments["*"].tailLaw).toBe("chi-square");
    expect(large.artifact.cutoff.law).toBe("deleted-distance");
    expect(large.report.lines.join("\n")).toContain("tail probabilities: P(χ²ₙ > d²) for every model");
  });

  it("are calibrated for fresh draws (share with tailProbability ≤ p ≈ p, averaged over forty fits), where χ² is not", async () => {
    const fits = byTestDepth({ quick: 40, thorough: 200 });
    const fresh = byTestDepth({ quick: 2_500, thorough: 5_000 });
    const levels = [0.01, 0.05, 0.2, 0.5];
    const stream = mulberry32(20261205);
    const lines: string[] = [];
    for (const m of [200, 300]) {
      const below = new Array<number>(levels.length).fill(0);
      const belowChiSquare = new Array<number>(levels.length).fill(0);
      for (let f = 0; f < fits; f++) {
        const { artifact } = await fitClassical(correlatedGaussianRows(stream, m));
        expect(artifact.segments["*"].tailLaw).toBe("predictive");
        const scorer = new Scorer(compileModel(artifact));
        for (const x of correlatedGaussianRows(stream, fresh)) {
          const result = scorer.score(x);
          const chiSquare = chiSquareSurvival(result.mahalanobisSq, N_COLUMNS);
          levels.forEach((p, k) => {
            if (result.tailProbability <= p) below[k]++;
            if (chiSquare <= p) belowChiSquare[k]++;
          });
        }
      }
      const total = fits * fresh;
      levels.forEach((p, k) => {
        const share = below[k] / total;
        const shareChiSquare = belowChiSquare[k] / total;
        lines.push(`${m} rows, p = ${p}: predictive ${(share * 100).toFixed(3)} %, χ² ${(shareChiSquare * 100).toFixed(3)} %`);
        // ± 20 % at the tail levels (the flag-rate rule), ± 10 % at the body.
        const tolerance = p <= 0.05 ? 0.2 : 0.1;
        expect(share, `${m} rows at p = ${p}`).toBeGreaterThanOrEqual(p * (1 - tolerance));
        expect(share, `${m} rows at p = ${p}`).toBeLessThanOrEqual(p * (1 + tolerance));
        // χ² reads small segments' fresh points as rarer than they are: far more than p fall below p.
        if (p === 0.01) expect(shareChiSquare, `${m} rows at p = ${p} under χ²`).toBeGreaterThan(p * (1 + tolerance));
      });
    }
    console.log(`fresh draws with tail probability ≤ p over ${fits} fits × ${fresh} draws:\n${lines.join("\n")}`);
  }, 120_000);
});
