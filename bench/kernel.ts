/**
 * Scoring-kernel benchmark: vectors per second of `mahalanobisSq` for n = 8, 16, 32, 64, beside the
 * straightforward C loop (bench/kernel.c, `cc -O3`). Both sides score equal inputs drawn from the
 * same xorshift32 stream (the checksums must agree), for the same wall-clock budget, in one process
 * each, one after the other; the ratio TS/C is reported. On a loaded machine both sides slow down,
 * so read the ratio rather than the absolute figures.
 */
import { execFileSync } from "node:child_process";
import { mkdtempSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { fileURLToPath } from "node:url";
import { mahalanobisSq } from "../shared-model/src/score";
import { xorshift32 } from "./xorshift";

export interface KernelFigure {
  n: number;
  typescriptVectorsPerSecond: number;
  cVectorsPerSecond: number | null;
  ratioToC: number | null;
  checksumsAgree: boolean | null;
}

const POOL = 1024;

/** Uniforms in [0, 1) from kernel.c's generator and seed, so both sides score the same numbers. */
function makeUniform(): () => number {
  const next = xorshift32(2463534242);
  return () => next() / 4294967296;
}

function inputs(n: number) {
  const next = makeUniform();
  const precision = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      const v = i === j ? 1 + next() : 0.01 * (next() - 0.5);
      precision[i * n + j] = v;
      precision[j * n + i] = v;
    }
  }
  const mean = new Float64Array(n);
  for (let i = 0; i < n; i++) mean[i] = next();
  const xs = new Float64Array(n * POOL);
  for (let k = 0; k < xs.length; k++) xs[k] = next() * 2;
  return { precision, mean, xs };
}

function runTypeScript(n: number, seconds: number): { vectorsPerSecond: number; checksum: number } {
  const { precision, mean, xs } = inputs(n);
  const diff = new Float64Array(n);
  const views = Array.from({ length: POOL }, (_, k) => xs.subarray(k * n, k * n + n));
  // Warm-up so the optimizing compiler has settled before the clock starts.
  for (let r = 0; r < 200; r++) for (let k = 0; k < POOL; k++) mahalanobisSq(precision, mean, views[k], n, diff);
  let checksum = 0;
  let vectors = 0;
  const start = process.hrtime.bigint();
  let elapsed = 0;
  while (elapsed < seconds) {
    for (let k = 0; k < POOL; k++) checksum += mahalanobisSq(precision, mean, views[k], n, diff);
    vectors += POOL;
    elapsed = Number(process.hrtime.bigint() - start) / 1e9;
  }
  return { vectorsPerSecond: vectors / elapsed, checksum: checksum / vectors };
}

function compileC(): string | null {
  const source = fileURLToPath(new URL("./kernel.c", import.meta.url));
  const binary = join(mkdtempSync(join(tmpdir(), "isodense-kernel-")), "kernel");
  try {
    execFileSync("cc", ["-O3", "-o", binary, source], { stdio: "pipe" });
    return binary;
  } catch {
    return null;
  }
}

/** Runs the kernel comparison; `seconds` is the budget per side and per n. */
export function benchKernel(sizes = [8, 16, 32, 64], seconds = 1.5): KernelFigure[] {
  const binary = compileC();
  return sizes.map((n) => {
    const ts = runTypeScript(n, seconds);
    let c: { vectorsPerSecond: number; checksum: number } | null = null;
    if (binary) c = JSON.parse(execFileSync(binary, [String(n), String(seconds)], { encoding: "utf8" }));
    return {
      n,
      typescriptVectorsPerSecond: Math.round(ts.vectorsPerSecond),
      cVectorsPerSecond: c ? Math.round(c.vectorsPerSecond) : null,
      ratioToC: c ? Number((ts.vectorsPerSecond / c.vectorsPerSecond).toFixed(3)) : null,
      checksumsAgree: c ? Math.abs(ts.checksum - c.checksum) <= 1e-6 * Math.abs(c.checksum) : null,
    };
  });
}
