/**
 * Writing CSV cells: RFC 4180 quoting for every CSV file isodense writes, and spreadsheet-safe
 * text cells for CSV files that people open in a spreadsheet (the labelled-set
 * export). A spreadsheet reads a cell that begins with `=`, `+`, `-` or `@` as a formula, and a
 * leading tab or carriage return can hide one; a payment id such as `=HYPERLINK(…)` chosen by the
 * caller would then run on an analyst's machine ("CSV injection", OWASP; the leading-apostrophe
 * rule is common practice). A leading `'` makes the spreadsheet show the rest as text.
 *
 * The rule is exactly invertible so that export → `isodense tune` / `refit` keeps ids intact: a
 * text that begins with a trigger character **or with an apostrophe** gets one more apostrophe in
 * front, and {@link restoreTextCell} removes one apostrophe only when the next character is a
 * trigger or an apostrophe. Numbers written by the service are not text cells (a number cannot
 * carry a formula) and are left alone, so `-12.5` stays a number.
 */

/**
 * One CSV cell as RFC 4180 writes it: quoted when it holds a comma, a quote or a line break, with
 * inner quotes doubled; anything else as it is.
 *
 * @example quoteCsvCell('say "hi"') // → '"say ""hi"""'
 * @example quoteCsvCell("web") // → "web"
 */
export function quoteCsvCell(text: string): string {
  return /[",\r\n]/.test(text) ? `"${text.replace(/"/g, '""')}"` : text;
}

/** Leading characters a spreadsheet may read as the start of a formula. */
const TRIGGERS = "=+-@\t\r";

function needsMark(first: string | undefined): boolean {
  return first !== undefined && (first === "'" || TRIGGERS.includes(first));
}

/**
 * Text as it should be written into a CSV cell meant for spreadsheets.
 *
 * @example
 * neutraliseTextCell('=HYPERLINK("http://x","y")') // → `'=HYPERLINK("http://x","y")`
 * neutraliseTextCell("pay-1") // → "pay-1"
 */
export function neutraliseTextCell(text: string): string {
  return needsMark(text[0]) ? `'${text}` : text;
}

/**
 * Undoes {@link neutraliseTextCell}: restoreTextCell(neutraliseTextCell(s)) === s for every s.
 *
 * @example
 * restoreTextCell("'=SUM(A1:A2)") // → "=SUM(A1:A2)"
 * restoreTextCell("'quoted") // → "'quoted" (never marked, since `q` is no trigger)
 */
export function restoreTextCell(cell: string): string {
  return cell[0] === "'" && needsMark(cell[1]) ? cell.slice(1) : cell;
}
