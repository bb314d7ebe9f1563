import { describe, expect, it } from "vitest";
import { decodeCursor, encodeCursor, type CursorPosition } from "./cursor";

describe("keyset cursors", () => {
  it("decode to the position they were made from, including tiny and negative sort values", () => {
    const positions: CursorPosition[] = [
      { sort: "tail", direction: "asc", state: "open", value: -434.21, id: 42 },
      { sort: "tail", direction: "desc", state: "open", value: -1e308, id: 43 },
      { sort: "amount", direction: "asc", state: "open", value: 4.4e-17, id: 44 },
      { sort: "priority", direction: "desc", state: "decided", value: -20779.32289488517, id: 9_007_199_254_740_991 },
      { sort: "age", direction: "asc", state: "claimed", value: 1_796_119_200_000, id: 1 },
    ];
    for (const p of positions) expect(decodeCursor(encodeCursor(p))).toEqual({ position: p });
  });

  it("are URL-safe: no +, / or = in the text", () => {
    const text = encodeCursor({ sort: "amount", direction: "desc", state: "open", value: 1234.5678, id: 987654 });
    expect(text).toMatch(/^[A-Za-z0-9_-]+$/);
  });

  it("refuse text that is not a cursor, or a cursor whose content was altered, with a rule to act on", () => {
    expect(decodeCursor("%%%")).toEqual({ error: expect.stringContaining("not base64url JSON") });
    const altered = btoa(JSON.stringify(["colour", "asc", "open", 1, 2])).replace(/=+$/, "");
    expect(decodeCursor(altered)).toEqual({ error: expect.stringContaining("unexpected content") });
    const fractionalId = btoa(JSON.stringify(["tail", "asc", "open", 1, 2.5])).replace(/=+$/, "");
    expect(decodeCursor(fractionalId)).toEqual({ error: expect.stringContaining("start again without a cursor") });
    // The tail order walks log10 tail probabilities; a positive value was made on the tail probability itself.
    const fromTailProbability = btoa(JSON.stringify(["tail", "asc", "open", 4.4e-17, 2])).replace(/=+$/, "");
    expect(decodeCursor(fromTailProbability)).toEqual({ error: expect.stringContaining("start again without a cursor") });
  });
});
