import { describe, expect, test } from "vitest";
import { QUEUE_LIMITS } from "../storage/messages";
import { chunkForSend } from "./handoff";

describe("chunkForSend", () => {
  test("keeps every sendBatch within 100 messages", () => {
    const chunks = chunkForSend(
      Array.from({ length: 250 }, (_, i) => i),
      () => 10,
    );
    expect(chunks.map((c) => c.length)).toEqual([100, 100, 50]);
    expect(chunks.flat()).toEqual(Array.from({ length: 250 }, (_, i) => i));
  });

  test("keeps every sendBatch within the byte limit, and gives an oversized message a call of its own", () => {
    const sizes = [100_000, 100_000, 100_000, 300_000, 10];
    const chunks = chunkForSend(sizes, (s) => s);
    expect(chunks).toEqual([[100_000, 100_000], [100_000], [300_000], [10]]);
    for (const chunk of chunks) if (chunk.length > 1) expect(chunk.reduce((a, b) => a + b, 0)).toBeLessThanOrEqual(QUEUE_LIMITS.batchBytes);
  });

  test("returns no chunk for no messages", () => {
    expect(chunkForSend([])).toEqual([]);
  });
});
