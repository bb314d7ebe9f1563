/**
 * Settings of the loop (`[vars]` in wrangler.toml): how often an isolate flushes its traffic counts
 * and after how many days a live model is due for refit regardless of drift.
 */
import { ConfigError, type Env, type Problem } from "../env";

/** Parsed loop settings. */
export interface LoopSettings {
  /** Flush the isolate's counts once it has counted this many payments. */
  flushEveryPayments: number;
  /** …or once its oldest unflushed count is this many milliseconds old (checked on each request). */
  flushAfterMs: number;
  /** A live model older than this many days (from its `createdAt`) is due for refit. */
  refitAfterDays: number;
}

/** Defaults when a variable is not set: 500 payments, 30 s, 28 days. */
export const LOOP_DEFAULTS = { flushEveryPayments: 500, flushAfterSeconds: 30, refitAfterDays: 28 } as const;

type LoopEnv = Pick<Env, "DRIFT_FLUSH_PAYMENTS" | "DRIFT_FLUSH_SECONDS" | "REFIT_AFTER_DAYS">;

/**
 * Reads the loop settings; unset variables take {@link LOOP_DEFAULTS}.
 *
 * @throws {ConfigError} naming each malformed variable.
 * @example
 * readLoopSettings({ DRIFT_FLUSH_PAYMENTS: "500", DRIFT_FLUSH_SECONDS: "30", REFIT_AFTER_DAYS: "28" })
 * // → { flushEveryPayments: 500, flushAfterMs: 30000, refitAfterDays: 28 }
 */
export function readLoopSettings(env: LoopEnv): LoopSettings {
  const problems: Problem[] = [];
  const read = (name: keyof LoopEnv, fallback: number, min: number, max: number, unit: string): number => {
    const raw = env[name];
    if (raw === undefined) return fallback;
    const value = /^\s*[0-9]+(\.[0-9]+)?\s*$/.test(raw) ? Number(raw) : Number.NaN;
    if (!(value >= min && value <= max)) {
      problems.push({ field: name, rule: `must be ${unit} from ${min} to ${max} (received ${JSON.stringify(raw.slice(0, 32))})` });
    }
    return value;
  };
  const payments = read("DRIFT_FLUSH_PAYMENTS", LOOP_DEFAULTS.flushEveryPayments, 1, 100_000, "a number of payments");
  const seconds = read("DRIFT_FLUSH_SECONDS", LOOP_DEFAULTS.flushAfterSeconds, 0, 3600, "a number of seconds");
  const days = read("REFIT_AFTER_DAYS", LOOP_DEFAULTS.refitAfterDays, 1, 3650, "a number of days");
  if (problems.length > 0) throw new ConfigError(problems);
  return { flushEveryPayments: Math.floor(payments), flushAfterMs: seconds * 1000, refitAfterDays: days };
}
