/**
 * Field paths in error messages — `payments[2].features.amount`, `segments["card not present"]` —
 * written one way for the feature spec, the model artifact and the worker's request checks.
 */

/** Keys written after a dot; any other key is quoted in brackets. */
const PLAIN_KEY = /^[A-Za-z_$][A-Za-z0-9_$-]*$/;

/**
 * Appends one step to a path: an array index as `[2]`, a plain name as `.name` (no dot at the
 * start), any other name quoted, `["odd name"]`.
 *
 * @example joinFieldPath("segments", "card not present") // → 'segments["card not present"]'
 * @example joinFieldPath("", "features") // → "features"
 */
export function joinFieldPath(base: string, key: PropertyKey): string {
  if (typeof key === "number") return `${base}[${key}]`;
  const name = String(key);
  if (!PLAIN_KEY.test(name)) return `${base}[${JSON.stringify(name)}]`;
  return base === "" ? name : `${base}.${name}`;
}

/**
 * Writes a whole path (as zod reports it) after an optional base; the empty path gives the base.
 *
 * @example formatFieldPath(["payments", 2, "transactionId"]) // → "payments[2].transactionId"
 * @example formatFieldPath(["amount"], "payments[0]") // → "payments[0].amount"
 */
export function formatFieldPath(path: readonly PropertyKey[], base = ""): string {
  let out = base;
  for (const key of path) out = joinFieldPath(out, key);
  return out;
}
