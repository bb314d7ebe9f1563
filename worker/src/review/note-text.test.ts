import { describe, expect, it } from "vitest";
import { misleadingCharacter } from "./note-text";

describe("what a decision note may hold", () => {
  it("accepts ordinary text, tabs, line breaks, accents, right-to-left script and direction marks", () => {
    for (const note of ["Customer confirmed by phone.", "line one\nline two\r\n\tindented", "Zahlung bestätigt ✓", "שולם \u200F(RLM)", "😀 emoji pair"]) {
      expect(misleadingCharacter(note), note).toBeNull();
    }
  });

  it("names NUL, escape, DEL and C1 controls with their code point and position", () => {
    expect(misleadingCharacter("ab\u0000c")).toBe("U+0000 at position 3");
    expect(misleadingCharacter("\u001b[2J")).toBe("U+001B at position 1");
    expect(misleadingCharacter("x\u007f")).toBe("U+007F at position 2");
    expect(misleadingCharacter("x\u0085")).toBe("U+0085 at position 2");
  });

  it("names bidirectional overrides, embeddings and isolates", () => {
    expect(misleadingCharacter("pay \u202Egro.elpmaxe")).toBe("U+202E at position 5");
    for (const c of ["\u202A", "\u202B", "\u202C", "\u202D", "\u2066", "\u2067", "\u2068", "\u2069"]) expect(misleadingCharacter(c)).not.toBeNull();
  });

  it("names an unpaired surrogate instead of letting storage replace it", () => {
    expect(misleadingCharacter("a\uD800b")).toBe("U+D800 at position 2");
    expect(misleadingCharacter("a\uDFFF")).toBe("U+DFFF at position 2");
  });
});
