/**
 * Every plain-text variable of the service (`[vars]` in wrangler.toml), parsed by one zod schema.
 *
 * One rule for every number: plain decimal text (digits, an optional fraction and exponent, nothing
 * else), inside the setting's range, and a whole number where the setting counts things. A
 * malformed or missing variable fails with a {@link ConfigError} naming the variable and the rule
 * (and the text received: vars are not secrets), answered as a 500 without scoring on a wrong value.
 *
 * Adding a setting: declare it under `[vars]` in wrangler.toml with a comment, add one line to
 * {@link settingsSchema}, run `npm run env-types` (regenerates `worker/worker-configuration.d.ts`),
 * and read it with `readSettings(env, ["NAME"])` where it is used (DEVELOPERS.md, "Settings").
 */
import { z } from "zod";
import { ConfigError, type Problem } from "./env";

/** Upper bound on MAX_BATCH: one batch answer must stay well inside the queue's 100-message sends. */
export const MAX_BATCH_CEILING = 1000;

/** Digits with an optional fraction and exponent, surrounding blanks allowed; `0x10`, `1e`, `12abc` are not. */
const DECIMAL_TEXT = /^\s*[0-9]+(\.[0-9]+)?([eE][-+]?[0-9]+)?\s*$/;

/** A numeric setting: the range it must lie in, whether it counts things, and the unit it is in. */
interface NumberRule {
  min: number;
  max: number;
  /** Whole numbers only (counts of payments, days, reviews). */
  whole?: boolean;
  /** What the number counts or measures, for the error ("seconds", "payments"); none for a ratio. */
  unit?: string;
}

/** The one number rule every numeric setting follows (see the module comment). */
function numberSetting({ min, max, whole = false, unit }: NumberRule) {
  const rule = `must be a ${whole ? "whole " : ""}number${unit ? ` of ${unit}` : ""} from ${min} to ${max}`;
  return z.string({ error: (issue) => `${rule} (${issue.input === undefined ? "the variable is not set" : `received a ${typeof issue.input}`})` }).transform((raw, ctx) => {
    const value = DECIMAL_TEXT.test(raw) ? Number(raw) : Number.NaN;
    if (!(Number.isFinite(value) && value >= min && value <= max && (!whole || Number.isInteger(value)))) {
      ctx.addIssue({ code: "custom", message: `${rule} (received ${JSON.stringify(raw.length > 32 ? `${raw.slice(0, 32)}…` : raw)})` });
      return z.NEVER;
    }
    return value;
  });
}

/**
 * The settings: one line per `[vars]` entry, each parsed to a number in the unit its name says.
 * wrangler.toml holds the values (and says what each is for); this schema holds the rules.
 */
export const settingsSchema = z.object({
  /** Audit inclusion probability for passing payments. */
  AUDIT_SAMPLE_RATE: numberSetting({ min: 0, max: 1 }),
  /** How often an isolate re-reads the active-model pointer (0 = every request; tests only). */
  MODEL_REFRESH_SECONDS: numberSetting({ min: 0, max: 3600, unit: "seconds" }),
  /** Most payments accepted by one batch call. */
  MAX_BATCH: numberSetting({ min: 1, max: MAX_BATCH_CEILING, whole: true, unit: "payments" }),
  /** Most distinct accounts the payment form may name in one batch (one history call each: a subrequest). */
  MAX_BATCH_ACCOUNTS: numberSetting({ min: 1, max: MAX_BATCH_CEILING, whole: true, unit: "accounts" }),
  /** How long a transaction id names one payment, from its first sight (idempotency/claims.ts). */
  IDEMPOTENCY_WINDOW_SECONDS: numberSetting({ min: 1, max: 7 * 86_400, unit: "seconds" }),
  /** An isolate flushes its traffic counts after this many payments… */
  DRIFT_FLUSH_PAYMENTS: numberSetting({ min: 1, max: 100_000, whole: true, unit: "payments" }),
  /** …or once its oldest unflushed count is this old. */
  DRIFT_FLUSH_SECONDS: numberSetting({ min: 0, max: 3600, unit: "seconds" }),
  /** A live model older than this is marked due for refit by the weekly report. */
  REFIT_AFTER_DAYS: numberSetting({ min: 1, max: 3650, whole: true, unit: "days" }),
  /** The weekly report notes a shadow that has waited longer than this for a person's decision. */
  SHADOW_WAIT_DAYS: numberSetting({ min: 1, max: 3650, whole: true, unit: "days" }),
  /** Most distance between a `payment`'s own time and the server clock, either way (0 = no check). */
  PAYMENT_CLOCK_TOLERANCE_SECONDS: numberSetting({ min: 0, max: 604_800, unit: "seconds" }),
  /** Longest wait for an account's history (Durable Object) before answering 503 retryable. */
  HISTORY_TIMEOUT_MS: numberSetting({ min: 1, max: 30_000, unit: "milliseconds" }),
  /**
   * How long personal data is kept: decided review items with their notes and audit content (from
   * the decision), conflicts and shadow scores (from scoring), and an idle account's history.
   */
  RETENTION_DAYS: numberSetting({ min: 1, max: 3650, whole: true, unit: "days" }),
  /** Reviews one analyst can do in a day (the day summary's capacity). */
  ANALYST_DAILY_CAPACITY: numberSetting({ min: 1, max: 100_000, whole: true, unit: "reviews" }),
});

/** Name of a `[vars]` entry. */
export type SettingName = keyof z.input<typeof settingsSchema>;
/** Parsed settings, keyed by variable name, each a number in its variable's unit. */
export type Settings = z.output<typeof settingsSchema>;

const ALL_SETTINGS = Object.keys(settingsSchema.shape) as SettingName[];
const parsed = new Map<string, unknown>();

/**
 * Parses the named variables (all of them by default); cached while their raw values stay the same.
 * A part of the service reads only the variables it uses, so a malformed loop variable does not
 * fail the scoring route.
 *
 * @throws {ConfigError} naming each malformed or missing variable and the rule it broke.
 * @example
 * readSettings({ MAX_BATCH: "100", MODEL_REFRESH_SECONDS: "10" }, ["MAX_BATCH", "MODEL_REFRESH_SECONDS"])
 * // → { MAX_BATCH: 100, MODEL_REFRESH_SECONDS: 10 }
 */
export function readSettings<K extends SettingName = SettingName>(env: Partial<Record<SettingName, string>>, names: readonly K[] = ALL_SETTINGS as K[]): Pick<Settings, K> {
  const raw = env as Partial<Record<K, unknown>>;
  const key = names.map((name) => `${name}=${String(raw[name])}`).join("\u0000");
  const hit = parsed.get(key);
  if (hit) return hit as Pick<Settings, K>;
  const part = z.object(Object.fromEntries(names.map((name) => [name, settingsSchema.shape[name] as z.ZodType<number, string>])));
  const result = part.safeParse(Object.fromEntries(names.map((name) => [name, raw[name]])));
  if (!result.success) {
    const problems: Problem[] = result.error.issues.map((issue) => ({ field: String(issue.path[0]), rule: issue.message }));
    throw new ConfigError(problems);
  }
  if (parsed.size > 64) parsed.clear();
  parsed.set(key, result.data);
  return result.data as Pick<Settings, K>;
}
