/**
 * One fit-throughput measurement in its own process, so that peak memory belongs to this size alone.
 * Usage: node bin/run-ts.js bench/fit-child.ts <rows> <columns>. Prints one JSON line.
 * Rows are generated on the fly (correlated Gaussian, fixed seed) and never stored: what stays in
 * memory is the fit's own state, which is what "memory flat in rows" is about.
 */
import { fitModel, type FitRow, type RowSource } from "../shared-model/src/fit";
import type { FeatureDeclaration } from "../shared-model/src/types";
import { correlatedGaussian } from "./gaussian-rows";

const rows = Number(process.argv[2] ?? 100_000);
const n = Number(process.argv[3] ?? 32);

const source: RowSource = {
  async *pass(): AsyncIterable<FitRow> {
    const next = correlatedGaussian(n, 7, 11);
    for (let r = 0; r < rows; r++) {
      const values = new Float64Array(n);
      next(values);
      yield { values, segment: null };
    }
  },
};

const features: FeatureDeclaration[] = Array.from({ length: n }, (_, i) => ({ name: `f${i}`, transform: "none" }));
const baselineRss = process.memoryUsage().rss;
const started = process.hrtime.bigint();
await fitModel(source, { features, shape: "full", estimator: "classical", segmentBy: null, cutoffRate: 0.01, seed: 1 });
const seconds = Number(process.hrtime.bigint() - started) / 1e9;
const peakRssMiB = process.resourceUsage().maxRSS / 1024;
console.log(
  JSON.stringify({
    rows,
    columns: n,
    seconds: Number(seconds.toFixed(3)),
    rowsPerSecond: Math.round(rows / seconds),
    baselineRssMiB: Number((baselineRss / 2 ** 20).toFixed(1)),
    peakRssMiB: Number(peakRssMiB.toFixed(1)),
  }),
);
