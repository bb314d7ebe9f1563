import { describe, expect, test } from "vitest";
import { DEAD_LETTER_MAX_DELAY_SECONDS, DEAD_LETTER_MAX_RETRIES, deadLetterDelaySeconds } from "./queue-consumer";

describe("deadLetterDelaySeconds", () => {
  test("doubles from 2 s and stops growing at one hour", () => {
    expect([1, 2, 3, 4, 11, 12, 13, 50].map(deadLetterDelaySeconds)).toEqual([2, 4, 8, 16, 2048, 3600, 3600, 3600]);
    expect(deadLetterDelaySeconds(0)).toBe(2);
  });

  test("spreads the 100 dead-letter retries over about 3.7 days, inside the default 4-day queue retention", () => {
    let total = 0;
    for (let attempt = 1; attempt <= DEAD_LETTER_MAX_RETRIES; attempt++) total += deadLetterDelaySeconds(attempt);
    const days = total / 86_400;
    expect(days).toBeGreaterThan(3.6);
    expect(days).toBeLessThan(4);
    expect(DEAD_LETTER_MAX_DELAY_SECONDS).toBe(3600);
  });
});
