import { describe, expect, test } from "vitest";
import { contentHash, IDEMPOTENCY_SHARDS, shardOf } from "./claims";

describe("shardOf", () => {
  test("puts an id on the same shard every time and spreads ids evenly over all shards", () => {
    expect(shardOf("pay-000123")).toBe(shardOf("pay-000123"));
    const counts = new Array<number>(IDEMPOTENCY_SHARDS).fill(0);
    const n = 128_000;
    for (let i = 0; i < n; i++) counts[shardOf(`pay-${i.toString().padStart(7, "0")}`)]++;
    // n / shards expected per shard; a binomial count stays within ±5 % beyond 6 standard deviations
    // (σ = √(n p (1 − p)) ≈ 118 for 8 shards, against 800).
    const expected = n / IDEMPOTENCY_SHARDS;
    for (const c of counts) expect(Math.abs(c - expected)).toBeLessThan(0.05 * expected);
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
