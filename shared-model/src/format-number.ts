/**
 * Numbers in messages, reports and screens, written one way by the model core, the fit report, the
 * CLI, the worker's reports and the review app.
 */

/**
 * A number for people: whole numbers as they are, others with `significant` significant digits and
 * no trailing zeros; magnitudes below 1e-4 or from 1e15 up in exponent form; ±Infinity and NaN as
 * JavaScript writes them.
 *
 * @example formatForPeople(1240) // → "1240"
 * @example formatForPeople(0.0123456) // → "0.01235"
 * @example formatForPeople(0.00001234, 3) // → "1.23e-5"
 */
export function formatForPeople(value: number, significant = 4): string {
  if (!Number.isFinite(value)) return String(value);
  if (Number.isInteger(value) && Math.abs(value) < 1e15) return String(value);
  const magnitude = Math.abs(value);
  if (magnitude !== 0 && (magnitude < 1e-4 || magnitude >= 1e15)) return value.toExponential(significant - 1);
  return String(Number(value.toPrecision(significant)));
}

/**
 * A fraction as a percentage with `digits` decimals; `missing` where there is no finite fraction.
 *
 * @example formatPercent(0.0123) // → "1.23 %"
 * @example formatPercent(0.5, 1) // → "50.0 %"
 * @example formatPercent(Number.NaN) // → "n/a"
 */
export function formatPercent(fraction: number | null | undefined, digits = 2, missing = "n/a"): string {
  return fraction === null || fraction === undefined || !Number.isFinite(fraction) ? missing : `${(fraction * 100).toFixed(digits)} %`;
}
