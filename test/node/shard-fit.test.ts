/**
 * The sharded fit (scripts/shard-moments.ts) on the demo ledger: k shards accumulated apart,
 * shipped as JSON and merged give the single-pass mean and covariance to 1e-9 relative, provided
 * the transforms are fitted once on the pooled rows; fitting them per shard does not.
 */
import { readFileSync } from "node:fs";
import { describe, expect, test } from "vitest";
import { generateLedger, type LedgerRow } from "../../demo-ledger/generate";
import { parseRecordSpec } from "../../shared-model/src";
import { naivePerShardTransforms, shardAndMerge } from "../../scripts/shard-moments";

// The generator's own figures of the features the spec derives (equal to the derived ones to 4 decimals).
const decls = parseRecordSpec(JSON.parse(readFileSync(new URL("../../demo-ledger/spec.json", import.meta.url), "utf8"))).features.map(({ name, transform }) => ({
  name,
  transform,
}));
const rows: Float64Array[] = [];
for (const row of generateLedger({ rows: 20_000 })) {
  if (row.label === "legitimate") rows.push(Float64Array.from(decls, (d) => row[d.name as keyof LedgerRow] as number));
}

describe("fitting the demo ledger in shards", () => {
  for (const k of [2, 3, 7, 16]) {
    test(`${k} shards merged equal one pass: mean and covariance within 1e-9 relative`, () => {
      const result = shardAndMerge(rows, decls, k);
      expect(result.rowsPerShard.reduce((a, b) => a + b, 0)).toBe(rows.length);
      expect(result.merged.count).toBe(result.single.count);
      expect(result.meanRelativeError, `mean ${result.meanRelativeError}`).toBeLessThanOrEqual(1e-9);
      expect(result.covarianceRelativeError, `covariance ${result.covarianceRelativeError}`).toBeLessThanOrEqual(1e-9);
    });
  }

  test("one shard is the single pass itself, bit for bit", () => {
    const result = shardAndMerge(rows, decls, 1);
    expect(Array.from(result.merged.covariance)).toEqual(Array.from(result.single.covariance));
  });

  test("fitting a Yeo–Johnson λ per shard instead gives a visibly different covariance", () => {
    const contrast = decls.map((d) => (d.name === "amount" ? { ...d, transform: "yeo-johnson" as const } : d));
    const naive = naivePerShardTransforms(rows, contrast, 4);
    const amountAt = contrast.findIndex((d) => d.name === "amount");
    expect(new Set(naive.lambdas.map((l) => l[amountAt])).size).toBeGreaterThan(1);
    expect(naive.covarianceRelativeError).toBeGreaterThan(1e-4);
    expect(shardAndMerge(rows, contrast, 4).covarianceRelativeError).toBeLessThanOrEqual(1e-9);
  });

  test("refuses a shard count that is not a whole number from 1 to the row count", () => {
    expect(() => shardAndMerge(rows, decls, 0)).toThrow(/shards must be an integer from 1 to/);
    expect(() => shardAndMerge(rows, decls, 2.5)).toThrow(/Actual: 2.5/);
  });
});
