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
/** Decisions and undos one analyst may make on one item within DECISION_CHANGE_WINDOW_MS. */
export const DECISION_CHANGE_LIMIT = 10;
/** The sliding window of DECISION_CHANGE_LIMIT: one hour. */
export const DECISION_CHANGE_WINDOW_MS = 60 * 60 * 1000;
/** Audit events on the payment view's first page, and the most one page of the trail may hold. */
export const EVENT_PAGE = 20;
export const MAX_EVENT_PAGE = 100;
/** Lines of account history on the payment view. */
export const HISTORY_LIMIT = 10;
/** Most undecided flags of one account shown, and decided, together (a burst is about a dozen). */
export const ACCOUNT_FLAGS_LIMIT = 50;

/** Start of the UTC day holding `nowMs`, in ms. */
export function utcDayStart(nowMs: number): number {
  return Math.floor(nowMs / 86_400_000) * 86_400_000;
}
