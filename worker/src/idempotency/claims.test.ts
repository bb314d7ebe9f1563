import { describe, expect, test } from "vitest";
import { contentHash, IDEMPOTENCY_SHARDS, shardOf } from "./claims";

describe("shardOf", () => {
  test("puts an id on the same shard every time and spreads ids evenly over all shards", () => {
    expect(shardOf("pay-000123")).toBe(shardOf("pay-000123"));
    const counts = new Array<number>(IDEMPOTENCY_SHARDS).fill(0);
    const n = 128_000;
    for (let i = 0; i < n; i++) counts[shardOf(`pay-${i.toString().padStart(7, "0")}`)]++;
    // 1,000 expected per shard; a binomial count stays within ±20 % far beyond 5 standard deviations (σ ≈ 31.5).
    for (const c of counts) expect(Math.abs(c - 1000)).toBeLessThan(200);
  });
});

describe("contentHash", () => {
  test("ignores the order of feature keys but not their values, the segment or the account", async () => {
    const base = await contentHash({ amount: 10, items: 2 }, "web", "acct-1");
    expect(await contentHash({ items: 2, amount: 10 }, "web", "acct-1")).toBe(base);
    expect(await contentHash({ amount: 10.5, items: 2 }, "web", "acct-1")).not.toBe(base);
    expect(await contentHash({ amount: 10, items: 2 }, "app", "acct-1")).not.toBe(base);
    expect(await contentHash({ amount: 10, items: 2 }, "web", null)).not.toBe(base);
    expect(base).toMatch(/^[0-9a-f]{64}$/);
  });
});
