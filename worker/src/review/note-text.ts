/**
 * What a decision note may hold. Notes are read by other analysts and auditors, so text that can
 * mislead the reader is refused rather than stored: control characters (a NUL cuts some viewers
 * short, an escape sequence repaints a terminal), bidirectional embedding, override and isolate
 * characters (U+202E turns `gro.elpmaxe` into what looks like `example.org`: the "Trojan Source"
 * trick, Boucher & Anderson 2021), and unpaired surrogates (which storage would silently replace
 * with U+FFFD). Tab and line breaks stay allowed; so do the plain direction marks U+200E / U+200F,
 * which right-to-left writers need and which cannot reorder text on their own.
 */

/** C0 controls but tab, LF and CR; DEL and the C1 controls. */
// biome-ignore lint/suspicious/noControlCharactersInRegex: matching control characters is the point.
const CONTROL = /[\u0000-\u0008\u000b\u000c\u000e-\u001f\u007f-\u009f]/u;
/** Bidirectional embeddings and overrides (LRE, RLE, PDF, LRO, RLO) and isolates (LRI, RLI, FSI, PDI). */
const BIDI_CONTROL = /[\u202a-\u202e\u2066-\u2069]/u;
/** An unpaired surrogate (in `u` mode a lone surrogate is one code point of category Cs). */
const LONE_SURROGATE = /\p{Cs}/u;

/** The rule a refused note broke, worded for the `rule` of a 400. */
export const NOTE_TEXT_RULE =
  "must not contain control characters other than tab and line breaks (U+0000–U+001F, U+007F–U+009F), " +
  "bidirectional embedding, override or isolate characters (U+202A–U+202E, U+2066–U+2069), or unpaired surrogates";

/**
 * The first character of `text` that a note may not hold, as `U+XXXX at position N` (1-based, in
 * code points), or null when the text is fine.
 *
 * @example
 * misleadingCharacter("ok\nfine") // → null
 * misleadingCharacter("pay \u202Egro.elpmaxe") // → "U+202E at position 5"
 */
export function misleadingCharacter(text: string): string | null {
  let position = 0;
  for (const char of text) {
    position++;
    if (CONTROL.test(char) || BIDI_CONTROL.test(char) || LONE_SURROGATE.test(char)) {
      return `U+${char.codePointAt(0)!.toString(16).toUpperCase().padStart(4, "0")} at position ${position}`;
    }
  }
  return null;
}
