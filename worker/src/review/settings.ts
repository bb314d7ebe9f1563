/**
 * Fixed rules of the review workflow and the one setting it reads from `[vars]`.
 */
import { ConfigError, type Env } from "../env";

/** A claim lasts 15 minutes; after that anyone may take the item (the holder may renew earlier). */
export const CLAIM_TTL_MS = 15 * 60 * 1000;
/** A decision may be undone by its author for 5 minutes. */
export const UNDO_WINDOW_MS = 5 * 60 * 1000;
/** Longest note on a decision, in UTF-16 code units (JavaScript string length). */
export const MAX_NOTE_LENGTH = 2000;
/** Capacity assumed when ANALYST_DAILY_CAPACITY is not set: a few hundred reviews a day (common practice). */
export const DEFAULT_DAILY_CAPACITY = 200;
/** Lines of account history on the payment view. */
export const HISTORY_LIMIT = 10;

/** Env of the review routes: the worker's bindings plus the review's own optional variable. */
export type ReviewEnv = Env & {
  /** Reviews one analyst can do in a day, a positive integer as text, e.g. "200". */
  ANALYST_DAILY_CAPACITY?: string;
};

/**
 * Reads ANALYST_DAILY_CAPACITY.
 * @throws {ConfigError} when the variable is set but is not a whole number from 1 to 100,000.
 * @example dailyCapacity({ ANALYST_DAILY_CAPACITY: "250" } as ReviewEnv) // 250
 */
export function dailyCapacity(env: Pick<ReviewEnv, "ANALYST_DAILY_CAPACITY">): number {
  const raw = env.ANALYST_DAILY_CAPACITY;
  if (raw === undefined || raw.trim() === "") return DEFAULT_DAILY_CAPACITY;
  const value = /^\s*\d{1,6}\s*$/.test(raw) ? Number(raw) : NaN;
  if (!Number.isInteger(value) || value < 1 || value > 100_000) {
    throw new ConfigError([
      { field: "ANALYST_DAILY_CAPACITY", rule: `must be a whole number from 1 to 100000 (received ${JSON.stringify(raw.slice(0, 32))})` },
    ]);
  }
  return value;
}

/** Start of the UTC day holding `nowMs`, in ms. */
export function utcDayStart(nowMs: number): number {
  return Math.floor(nowMs / 86_400_000) * 86_400_000;
}
