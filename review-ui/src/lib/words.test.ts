import { describe, expect, it } from "vitest";
import { BASIS_WORDS, badgeWords, ESTIMATOR_WORDS, rowSubject, SELECTION_WORDS, SHAPE_WORDS, STATE_WORDS, TRANSFORM_WORDS } from "./words";

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
});
