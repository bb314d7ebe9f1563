/**
 * Counts in messages and reports, written one way for the model core, the fit report and the CLI.
 */

/**
 * A whole count with thousands separators, independent of the runtime's locale data; a fraction
 * is cut to its whole part.
 *
 * @example formatCount(48000) // → "48,000"
 * @example formatCount(-1234567) // → "-1,234,567"
 */
export function formatCount(value: number): string {
  const sign = value < 0 ? "-" : "";
  return sign + String(Math.abs(Math.trunc(value))).replace(/\B(?=(\d{3})+(?!\d))/g, ",");
}

/**
 * A count and its noun, plural unless the count is one.
 *
 * @example countOf(1, "row") // → "1 row"
 * @example countOf(12000, "entry", "entries") // → "12,000 entries"
 */
export function countOf(count: number, singular: string, pluralForm = `${singular}s`): string {
  return `${formatCount(count)} ${count === 1 ? singular : pluralForm}`;
}
