import { describe, expect, it } from "vitest";
import { BASIS_WORDS, badgeWords, describeAccountDecision, ESTIMATOR_WORDS, rowSubject, SELECTION_WORDS, SHAPE_WORDS, STATE_WORDS, TRANSFORM_WORDS } from "./words";

const clock = (iso: string) => iso.slice(11, 16);
const until = "2026-12-04T14:05:00.000Z";

describe("the app's words for the API's values", () => {
  it("names the three states Open, Claimed and Decided, as the API's open, claimed and decided", () => {
    expect(STATE_WORDS).toEqual({ open: "Open", claimed: "Claimed", decided: "Decided" });
  });

  it("words every enum value shown on screen in plain words, never the raw value", () => {
    for (const table of [BASIS_WORDS, ESTIMATOR_WORDS, SHAPE_WORDS, SELECTION_WORDS]) {
      for (const [value, words] of Object.entries(table)) {
        expect(words.length, value).toBeGreaterThan(0);
        expect(words, value).not.toBe(value);
      }
    }
    expect(BASIS_WORDS["flag-rate"]).not.toContain("flag-rate");
    expect(TRANSFORM_WORDS.none).toBe("");
  });

  it("qualifies a claimed badge with the holder, and says 'you' to the holder", () => {
    expect(badgeWords({ state: "claimed", claim: { by: "tomas", until } }, "rosa", clock)).toEqual({ state: "claimed", word: "Claimed", detail: "by tomas until 14:05" });
    expect(badgeWords({ state: "claimed", claim: { by: "rosa", until } }, "rosa", clock).detail).toBe("by you until 14:05");
  });

  it("qualifies a decided badge with the outcome and who decided, and leaves an open one bare", () => {
    const row = { state: "decided" as const, claim: null, decision: { outcome: "fraud" as const, by: "tomas" } };
    expect(badgeWords(rowSubject(row), "rosa", clock)).toEqual({ state: "decided", word: "Decided", detail: "fraud by tomas" });
    // The account history knows the outcome only.
    expect(badgeWords({ state: "decided", outcome: "legitimate" }, "rosa", clock).detail).toBe("legitimate");
    expect(badgeWords({ state: "open" }, "rosa", clock)).toEqual({ state: "open", word: "Open", detail: "" });
  });

  it("sums up an account decision, naming each flag left as it was and why", () => {
    const names = new Map([
      [1, "tx-1"],
      [2, "tx-2"],
      [3, "tx-3"],
    ]);
    const decided = [{ item: { id: 1 }, undoableUntil: until }] as never;
    const all = describeAccountDecision({ accountRef: "acct-7", outcome: "fraud", decided, refused: [] }, names, clock);
    expect(all).toBe("1 flag of acct-7 confirmed as fraud.");
    const some = describeAccountDecision(
      {
        accountRef: "acct-7",
        outcome: "legitimate",
        decided,
        refused: [
          { id: 2, error: "claimed-by-another", rule: "", claim: { by: "tomas", until } },
          { id: 3, error: "already-decided", rule: "" },
        ],
      },
      names,
      clock,
    );
    expect(some).toBe("1 flag of acct-7 dismissed as legitimate. Left as they were: tx-2 (claimed by tomas until 14:05), tx-3 (already decided).");
    expect(describeAccountDecision({ accountRef: "acct-7", outcome: "fraud", decided: [], refused: [{ id: 9, error: "not-found", rule: "" }] }, names, clock)).toBe(
      "No flag of acct-7 was decided. Left as they were: item 9 (not found).",
    );
  });
});
