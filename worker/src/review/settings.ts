/**
 * Fixed rules of the review workflow (its one deployment setting, ANALYST_DAILY_CAPACITY, is parsed
 * with the others in `../settings.ts`).
 */

/** A claim lasts 15 minutes; after that anyone may take the item (the holder may renew earlier). */
export const CLAIM_TTL_MS = 15 * 60 * 1000;
/** A decision may be undone by its author for 5 minutes. */
export const UNDO_WINDOW_MS = 5 * 60 * 1000;
/** Longest note on a decision, in UTF-16 code units (JavaScript string length). */
export const MAX_NOTE_LENGTH = 2000;
/** Lines of account history on the payment view. */
export const HISTORY_LIMIT = 10;

/** Start of the UTC day holding `nowMs`, in ms. */
export function utcDayStart(nowMs: number): number {
  return Math.floor(nowMs / 86_400_000) * 86_400_000;
}
