import { describe, expect, test } from "vitest";
import { AnswerCache, answerKey, contentHash } from "./answer-cache";

describe("AnswerCache", () => {
  test("evicts the least recently used entry when full, counting a read as a use", () => {
    const cache = new AnswerCache<string>(2);
    cache.set("a", { bodyHash: "ha", answer: "A" });
    cache.set("b", { bodyHash: "hb", answer: "B" });
    expect(cache.get("a")?.answer).toBe("A");
    cache.set("c", { bodyHash: "hc", answer: "C" });
    expect(cache.get("b")).toBeUndefined();
    expect(cache.get("a")?.answer).toBe("A");
    expect(cache.get("c")?.answer).toBe("C");
    expect(cache.size).toBe(2);
  });

  test("refuses a capacity that is not a positive integer", () => {
    expect(() => new AnswerCache(0)).toThrow(/positive integer/);
    expect(() => new AnswerCache(1.5)).toThrow(/positive integer/);
  });

  test("keys by model version and transaction id, so a new model scores a repeat afresh", () => {
    expect(answerKey("m1", "pay-1")).not.toBe(answerKey("m2", "pay-1"));
    expect(answerKey("m1", "pay-1")).toBe(answerKey("m1", "pay-1"));
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
