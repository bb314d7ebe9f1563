import { describe, expect, it } from "vitest";
import { cutoffForFlagRate } from "./cutoff";
import { deletedDistance, outOfSampleCutoff } from "./cutoff-law";
import { predictiveTail } from "./tail-law";
import { correlatedGaussianRows, rowSource } from "./test-support";
import { fSurvival, fUpperQuantile, regularizedBeta } from "./distributions";
import { fitModel } from "./fit";
import { fromRows } from "./linalg";
import { compileModel, mahalanobisSq, Scorer } from "./score";
import { mulberry32 } from "./seeded-stream";

function expectClose(actual: number, expected: number, tolerance: number, label: string): void {
  const diff = Math.abs(actual - expected) / Math.max(1e-300, Math.abs(expected));
  expect(diff, `${label}: actual ${actual}, expected ${expected}, relative difference ${diff}`).toBeLessThanOrEqual(tolerance);
}

const N_COLUMNS = 8;
const features = Array.from({ length: N_COLUMNS }, (_, j) => ({ name: `x${j}`, transform: "none" as const }));

describe("F distribution and incomplete beta", () => {
  it("match SciPy's F survival function and upper quantile", () => {
    // SciPy 1.10.1 (Debian python3-scipy): scipy.stats.f.sf(x, d1, d2), f.isf(p, d1, d2), scipy.special.betainc.
    const sf: [number, number, number, number][] = [
      [1.2, 8, 192, 0.3008929868659243],
      [2.6, 8, 192, 0.010136540966188606],
      [3.0, 8, 292, 0.0030004392194695564],
      [2.5, 8, 992, 0.010875759754170062],
      [4.0, 1, 10, 0.07338803477074037],
      [2.9, 8, 4992, 0.003164593186909201],
      [0.5, 3, 7, 0.6940363875688136],
      [10, 8, 192, 1.2940379264332879e-11],
    ];
    for (const [x, d1, d2, p] of sf) expectClose(fSurvival(x, d1, d2), p, 1e-11, `sf ${x} ${d1} ${d2}`);
    const isf: [number, number, number, number][] = [
      [0.01, 8, 192, 2.6050504410129944],
      [0.01, 8, 992, 2.5291744969031034],
      [0.01, 8, 4992, 2.5148258725202215],
      [0.05, 3, 7, 4.346831399907815],
    ];
    for (const [p, d1, d2, x] of isf) expectClose(fUpperQuantile(p, d1, d2), x, 1e-10, `isf ${p} ${d1} ${d2}`);
    expectClose(regularizedBeta(0.3, 2.5, 3.5), 0.2967529892956661, 1e-13, "betainc(2.5, 3.5, 0.3)");
    expectClose(regularizedBeta(0.9, 96, 4), 0.008471470942876093, 1e-12, "betainc(96, 4, 0.9)");
  });
});

describe("deletedDistance", () => {
  it("equals the distance to a classical fit without the row (Sherman–Morrison), checked by refitting", async () => {
    const rows = correlatedGaussianRows(mulberry32(11), 60);
    const { artifact } = await fitModel(rowSource(rows), { features, shape: "full", estimator: "classical", segmentBy: null, cutoffRate: 0.05, createdAt: "2026-12-04T00:00:00Z" });
    const seg = artifact.segments["*"];
    for (const i of [0, 7, 33]) {
      const inSample = mahalanobisSq(fromRows(seg.precision), Float64Array.from(seg.mean), rows[i], N_COLUMNS, new Float64Array(N_COLUMNS));
      const without = await fitModel(rowSource(rows.filter((_, k) => k !== i)), {
        features,
        shape: "full",
        estimator: "classical",
        segmentBy: null,
        cutoffRate: 0.05,
        createdAt: "2026-12-04T00:00:00Z",
      });
      const s = without.artifact.segments["*"];
      const refit = mahalanobisSq(fromRows(s.precision), Float64Array.from(s.mean), rows[i], N_COLUMNS, new Float64Array(N_COLUMNS));
      expectClose(deletedDistance(inSample, 60), refit, 1e-9, `row ${i}`);
    }
  });
});

describe("outOfSampleCutoff", () => {
  it("chooses the predictive law when the tail holds few rows and says so", () => {
    const inSample = Float64Array.from({ length: 300 }, (_, i) => i / 30);
    const cut = outOfSampleCutoff({ inSample, deleted: inSample.map((d) => deletedDistance(d, 300)), traffic: [{ key: "*", rows: 300, scored: 300 }], n: 8, rate: 0.01 });
    expect(cut.law).toBe("predictive");
    expect(cut.lawReason).toContain("'*' (3 rows in its tail)");
    // Under the model the cutoff flags exactly 1 % of new points: 8·301/292 · F⁻¹(0.99; 8, 292).
    expectClose(predictiveTail(cut.mahalanobisSq, 8, 300), 0.01, 1e-9, "predictive tail");
    expectClose(cut.mahalanobisSq, ((8 * 301) / 292) * fUpperQuantile(0.01, 8, 292), 1e-9, "cutoff");
  });

  it("flags fresh payments at the asked rate ± 20 %, averaged over ten fits, for segments of 200 to 5,000 rows", async () => {
    const thorough = process.env.ISODENSE_TEST_DEPTH === "thorough";
    const fits = thorough ? 30 : 10;
    const fresh = thorough ? 40_000 : 10_000;
    const rate = 0.01;
    const stream = mulberry32(20261204);
    const lines: string[] = [];
    for (const m of [200, 300, 1000, 5000]) {
      let flaggedNew = 0;
      let flaggedOld = 0;
      let law = "";
      for (let f = 0; f < fits; f++) {
        const rows = correlatedGaussianRows(stream, m);
        const { artifact } = await fitModel(rowSource(rows), {
          features,
          shape: "full",
          estimator: "classical",
          segmentBy: null,
          cutoffRate: rate,
          createdAt: "2026-12-04T00:00:00Z",
        });
        const scorer = new Scorer(compileModel(artifact));
        // The cutoff used before: the in-sample quantile of the training rows' own distances.
        const inSample = Float64Array.from(rows, (r) => scorer.score(r).mahalanobisSq);
        const oldCut = cutoffForFlagRate(inSample, rate, N_COLUMNS).mahalanobisSq;
        for (const x of correlatedGaussianRows(stream, fresh)) {
          const result = scorer.score(x);
          if (result.flagged) flaggedNew++;
          if (result.mahalanobisSq > oldCut) flaggedOld++;
        }
        law = outOfSampleCutoff({
          inSample,
          deleted: inSample.map((d) => deletedDistance(d, m)),
          traffic: [{ key: "*", rows: m, scored: m }],
          n: N_COLUMNS,
          rate,
        }).law;
      }
      const observed = flaggedNew / (fits * fresh);
      lines.push(`${m} rows (${law}): fresh flagged ${(observed * 100).toFixed(2)} %, in-sample cutoff ${((flaggedOld / (fits * fresh)) * 100).toFixed(2)} %`);
      expect(observed, `${m} rows`).toBeGreaterThanOrEqual(rate * 0.8);
      expect(observed, `${m} rows`).toBeLessThanOrEqual(rate * 1.2);
    }
    console.log(`asked 1.00 % over ${fits} fits × ${fresh} fresh draws:\n${lines.join("\n")}`);
  }, 120_000);
});
