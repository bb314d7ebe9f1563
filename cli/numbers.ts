/**
 * Strict parsing and plain formatting of numbers for the command line and for ledger cells.
 *
 * `Number("0x10")`, `Number(" ")` and `parseFloat("12abc")` all accept text a ledger should never
 * hold, so cells and option values go through one decimal grammar instead.
 */

// Optional sign, digits with an optional fraction (or a bare fraction), optional exponent.
// No whitespace, no hex/octal/binary prefixes, no "Infinity"/"NaN", no digit separators.
const DECIMAL = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;

/**
 * Parses a decimal number written the way a spreadsheet or a database export writes it.
 *
 * @returns the finite number, or `null` when the text is not a plain decimal (e.g. `"12abc"`,
 *   `"0x10"`, `" "`, `""`, `"NaN"`) or overflows to ±Infinity (e.g. `"1e999"`).
 * @example parseStrictNumber("1e3") // 1000
 * @example parseStrictNumber("0x10") // null
 */
export function parseStrictNumber(text: string): number | null {
  if (!DECIMAL.test(text)) return null;
  const value = Number(text);
  return Number.isFinite(value) ? value : null;
}

/**
 * Explains why `text` is not accepted as a number, for error messages ("… 'abc' is not a number").
 * Returns `null` when the text parses.
 * @example whyNotANumber("") // "the cell is empty; a number is required"
 */
export function whyNotANumber(text: string): string | null {
  if (text === "") return "the cell is empty; a number is required";
  if (text.trim() === "") return `'${text}' is blank; a number is required`;
  if (/^[+-]?(?:nan|inf|infinity)$/i.test(text.trim())) return `'${text}' is not a finite number`;
  if (text !== text.trim()) return `'${text}' has spaces around the number; write the number alone`;
  if (DECIMAL.test(text)) {
    return parseStrictNumber(text) === null ? `'${text}' is too large to be a finite number` : null;
  }
  return `'${text}' is not a number`;
}

/** Counts with thousands separators, as the model core writes them (`12,000`). */
export { formatCount } from "../shared-model/src/format-count";

/** Numbers and percentages for people, as the model core writes them. */
export { formatForPeople, formatPercent } from "../shared-model/src/format-number";
