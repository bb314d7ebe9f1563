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

/**
 * Formats a number for people: whole numbers as they are, others with `significant` significant
 * digits and without trailing zeros; very large or small magnitudes in exponent form.
 * @example formatForPeople(1240) // "1240"
 * @example formatForPeople(0.0123456) // "0.01235"
 */
export function formatForPeople(value: number, significant = 4): string {
  if (!Number.isFinite(value)) return String(value);
  if (Number.isInteger(value) && Math.abs(value) < 1e15) return String(value);
  const magnitude = Math.abs(value);
  if (magnitude !== 0 && (magnitude < 1e-4 || magnitude >= 1e15)) return value.toExponential(significant - 1);
  return String(Number(value.toPrecision(significant)));
}

/** Counts with thousands separators, as the model core writes them (`12,000`). */
export { formatCount } from "../shared-model/src/format-count";

/**
 * Formats a fraction as a percentage with two decimals (`0.0123` → `1.23 %`).
 * @example formatPercent(0.01) // "1.00 %"
 */
export function formatPercent(fraction: number): string {
  return Number.isFinite(fraction) ? `${(fraction * 100).toFixed(2)} %` : "n/a";
}
