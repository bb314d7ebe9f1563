/**
 * Which decisions the outcome estimates (precision, recall, prevalence and the operating table) may
 * use while review items still wait: only those of (model version, UTC day) cells in which every
 * review item — flags and audit draws alike — is decided.
 *
 * Why restrict rather than reweight: reweighting the decided items within a cell by
 * (items in the cell) / (decided items in the cell) is the weighting-class adjustment for
 * nonresponse (Kalton & Flores-Cervantes 2003, "Weighting methods", J. Official Statistics
 * 19:81–97); it removes the bias only when, within a cell, which items are decided does not depend
 * on the outcome. Analysts do the opposite: a payment that looks like fraud is often settled first,
 * so a half-decided day is fraud-rich and inflates precision and prevalence whatever its weight. A
 * fully decided day has no missing outcomes, so the Horvitz–Thompson weights 1/π stay unbiased.
 * The price is fewer labels until a day is finished; the undecided count is shown beside the figures.
 */

/** A review item's cell: the model version that scored it and its UTC day. */
export interface DecisionCell {
  version: string;
  /** UTC day (any consistent key: day number or YYYY-MM-DD). */
  day: number | string;
}

/**
 * For each decided item, whether its (version, day) cell is fully decided.
 *
 * @param decided cells of the decided items (one entry per item)
 * @param undecided cells holding at least one undecided item (repeats are fine)
 * @returns a mask over `decided`: true where the item may be used for outcome estimates
 * @example
 * onFullyDecidedDays([{ version: "m1", day: 20420 }, { version: "m1", day: 20421 }], [{ version: "m1", day: 20421 }]) // [true, false]
 */
export function onFullyDecidedDays(decided: readonly DecisionCell[], undecided: readonly DecisionCell[]): boolean[] {
  const open = new Set(undecided.map(cellKey));
  return decided.map((cell) => !open.has(cellKey(cell)));
}

function cellKey(cell: DecisionCell): string {
  return `${cell.version}\u0000${cell.day}`;
}
