/**
 * One fit-throughput measurement in its own process, so that peak memory belongs to this size alone.
 * Usage: node bin/run-ts.js bench/fit-child.ts <rows> <columns>. Prints one JSON line.
 * Rows are generated on the fly (correlated Gaussian, fixed seed) and never stored: what stays in
 * memory is the fit's own state, which is what "memory flat in rows" is about.
 */
import { fitModel, type FitRow, type RowSource } from "../shared-model/src/fit";
import type { FeatureDeclaration } from "../shared-model/src/types";
import { xorshift32 } from "./xorshift";

const rows = Number(process.argv[2] ?? 100_000);
const n = Number(process.argv[3] ?? 32);

/** Uniforms strictly inside (0, 1), as Box–Muller's logarithm needs. */
function makeUniform(seed: number): () => number {
  const next = xorshift32(seed);
  return () => (next() + 0.5) / 4294967296;
}

// A fixed lower-triangular mixing matrix gives the columns a dense correlation structure.
const mixing = new Float64Array(n * n);
{
  const next = makeUniform(7);
  for (let i = 0; i < n; i++) for (let j = 0; j <= i; j++) mixing[i * n + j] = i === j ? 1 : 0.4 * (next() - 0.5);
}

const source: RowSource = {
  async *pass(): AsyncIterable<FitRow> {
    const next = makeUniform(11);
    const z = new Float64Array(n);
    for (let r = 0; r < rows; r++) {
      for (let i = 0; i < n; i += 2) {
        // Box–Muller: two standard normals per pair of uniforms.
        const radius = Math.sqrt(-2 * Math.log(next()));
        const angle = 2 * Math.PI * next();
        z[i] = radius * Math.cos(angle);
        if (i + 1 < n) z[i + 1] = radius * Math.sin(angle);
      }
      const values = new Float64Array(n);
      for (let i = 0; i < n; i++) {
        let s = 10;
        for (let j = 0; j <= i; j++) s += mixing[i * n + j] * z[j];
        values[i] = s;
      }
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
