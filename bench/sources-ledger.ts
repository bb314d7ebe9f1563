/**
 * The fit-from-sources benchmark's input: a ledger of correlated Gaussian payments, `rows` × 32
 * feature columns f0…f31 written with %.6f (six decimals), fixed seed, plus an id column.
 * Usage: node bin/run-ts.js bench/sources-ledger.ts <rows> <out.csv>
 */
import { createWriteStream } from "node:fs";
import { correlatedGaussian } from "./gaussian-rows";

/** Columns of the benchmark ledger. */
export const BENCH_COLUMNS = 32;

/**
 * Writes the benchmark ledger.
 * @example await writeBenchLedger(1_000_000, "/tmp/ledger.csv")
 */
export async function writeBenchLedger(rows: number, path: string, n = BENCH_COLUMNS): Promise<void> {
  const next = correlatedGaussian(n, 7, 20261204);
  const row = new Float64Array(n);
  const out = createWriteStream(path);
  const header = ["id", ...Array.from({ length: n }, (_, i) => `f${i}`)].join(",") + "\n";
  out.write(header);
  let buffer = "";
  for (let r = 0; r < rows; r++) {
    next(row);
    let line = String(r + 1);
    for (let i = 0; i < n; i++) line += "," + row[i].toFixed(6);
    buffer += line + "\n";
    if (buffer.length > 1 << 20) {
      if (!out.write(buffer)) await new Promise<void>((resolve) => out.once("drain", () => resolve()));
      buffer = "";
    }
  }
  out.write(buffer);
  await new Promise<void>((resolve, reject) => out.end((error?: Error | null) => (error ? reject(error) : resolve())));
}

if (process.argv[1]?.endsWith("sources-ledger.ts")) {
  await writeBenchLedger(Number(process.argv[2]), process.argv[3]);
}
