/**
 * Bindings and settings of the edge scoring service, as declared in `wrangler.toml`.
 *
 * Settings arrive as strings (`[vars]`); {@link readSettings} turns them into numbers once per
 * distinct set of values and fails with a {@link ConfigError} naming the variable when one is
 * malformed, so a bad deployment answers a clear 500 instead of scoring with a wrong value.
 */
import type { HandoffMessage } from "./storage/messages";

/** Worker bindings (KV, D1, Queue), plain-text variables and secrets. */
export interface Env {
  /** Model artifacts under `model:<version>` (immutable) and the pointer under `pointer:active`. */
  MODELS: KVNamespace;
  /** Review store (tables `review_items`, `shadow_scores`, `model_events`, and the loop's counts and reports). */
  DB: D1Database;
  /** Producer of the hand-off queue `isodense-flags`. */
  FLAGS: Queue<HandoffMessage>;
  /** Fraction in [0, 1] of passing payments drawn into the audit sample, e.g. "0.002". */
  AUDIT_SAMPLE_RATE: string;
  /** Seconds between re-reads of the active-model pointer, e.g. "10". */
  MODEL_REFRESH_SECONDS: string;
  /** Most payments in one batch call, e.g. "100". */
  MAX_BATCH: string;
  /** Flush an isolate's traffic counts after this many payments, e.g. "500" (default 500). */
  DRIFT_FLUSH_PAYMENTS?: string;
  /** …or after this many seconds, e.g. "30" (default 30). */
  DRIFT_FLUSH_SECONDS?: string;
  /** A live model older than this many days is marked due for refit by the weekly report (default 28). */
  REFIT_AFTER_DAYS?: string;
  /** Secret: comma-separated `user:token` entries for the payment flow (score only). */
  FLOW_CREDENTIALS?: string;
  /** Secret: comma-separated `user:token` entries for fraud analysts (review, next issue). */
  ANALYST_CREDENTIALS?: string;
  /** Secret: comma-separated `user:token` entries for admins (everything). */
  ADMIN_CREDENTIALS?: string;
}

/** A field/rule pair: what was wrong and which rule it broke. The unit of every error answer. */
export interface Problem {
  /** Dotted path of the offending field (`features.amount`, `payments[3].transactionId`), or a
   *  header / variable name (`content-type`, `MAX_BATCH`). */
  field: string;
  /** The rule, with what was expected and what came. */
  rule: string;
}

/**
 * A deployment mistake (malformed variable or secret). Answered as a 500 that names the variable
 * and the rule, never its value.
 *
 * @example
 * throw new ConfigError([{ field: "MAX_BATCH", rule: "must be an integer from 1 to 1000 (received a non-integer)" }]);
 */
export class ConfigError extends Error {
  readonly problems: Problem[];
  constructor(problems: Problem[]) {
    super(`configuration error: ${problems.map((p) => `${p.field} ${p.rule}`).join("; ")}`);
    this.name = "ConfigError";
    this.problems = problems;
  }
}

/** Parsed `[vars]`. */
export interface Settings {
  /** Audit inclusion probability for passing payments, in [0, 1]. */
  auditSampleRate: number;
  /** Pointer refresh interval in milliseconds (0 = re-read on every request; tests only). */
  modelRefreshMs: number;
  /** Most payments per batch call. */
  maxBatch: number;
}

/** Upper bound on MAX_BATCH: one batch answer must stay well inside the queue's 100-message sends. */
export const MAX_BATCH_CEILING = 1000;

let cachedKey: string | undefined;
let cachedSettings: Settings | undefined;

/**
 * Parses the plain-text variables into {@link Settings}; cached while the raw values stay the same.
 *
 * @throws {ConfigError} naming each malformed variable.
 * @example
 * readSettings({ AUDIT_SAMPLE_RATE: "0.002", MODEL_REFRESH_SECONDS: "10", MAX_BATCH: "100" } as Env)
 * // → { auditSampleRate: 0.002, modelRefreshMs: 10000, maxBatch: 100 }
 */
export function readSettings(env: Pick<Env, "AUDIT_SAMPLE_RATE" | "MODEL_REFRESH_SECONDS" | "MAX_BATCH">): Settings {
  const key = `${env.AUDIT_SAMPLE_RATE}\u0000${env.MODEL_REFRESH_SECONDS}\u0000${env.MAX_BATCH}`;
  if (cachedSettings && cachedKey === key) return cachedSettings;
  const problems: Problem[] = [];
  const auditSampleRate = decimal(env.AUDIT_SAMPLE_RATE);
  if (auditSampleRate === null || auditSampleRate < 0 || auditSampleRate > 1) {
    problems.push({ field: "AUDIT_SAMPLE_RATE", rule: `must be a decimal number from 0 to 1 (${shapeOf(env.AUDIT_SAMPLE_RATE)})` });
  }
  const refreshSeconds = decimal(env.MODEL_REFRESH_SECONDS);
  if (refreshSeconds === null || refreshSeconds < 0 || refreshSeconds > 3600) {
    problems.push({ field: "MODEL_REFRESH_SECONDS", rule: `must be a number of seconds from 0 to 3600 (${shapeOf(env.MODEL_REFRESH_SECONDS)})` });
  }
  const maxBatch = decimal(env.MAX_BATCH);
  if (maxBatch === null || !Number.isInteger(maxBatch) || maxBatch < 1 || maxBatch > MAX_BATCH_CEILING) {
    problems.push({ field: "MAX_BATCH", rule: `must be an integer from 1 to ${MAX_BATCH_CEILING} (${shapeOf(env.MAX_BATCH)})` });
  }
  if (problems.length > 0) throw new ConfigError(problems);
  cachedSettings = { auditSampleRate: auditSampleRate!, modelRefreshMs: refreshSeconds! * 1000, maxBatch: maxBatch! };
  cachedKey = key;
  return cachedSettings;
}

/** Strict decimal parse: digits with an optional fraction and exponent; anything else is null. */
function decimal(raw: string | undefined): number | null {
  if (typeof raw !== "string" || !/^\s*[0-9]+(\.[0-9]+)?([eE][-+]?[0-9]+)?\s*$/.test(raw)) return null;
  const value = Number(raw);
  return Number.isFinite(value) ? value : null;
}

/** Describes a plain-text variable's value for an error (vars are not secrets; cut to 32 chars). */
function shapeOf(raw: string | undefined): string {
  if (raw === undefined) return "the variable is not set";
  return `received ${JSON.stringify(raw.length > 32 ? `${raw.slice(0, 32)}…` : raw)}`;
}
