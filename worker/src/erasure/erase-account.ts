/**
 * Erasure of one account's data on request (a data subject's request, or an operator's), audited
 * without the data: the `erasure_events` row is written first (actor, time, SHA-256 of the account
 * reference, the stores), then each store erases, then the row says `done` with counts, or `failed`.
 *
 * Each store is an {@link Eraser}: the account history (its Durable Object) here, the review store
 * (items, notes, audit content, conflicts, shadow scores) in review-store-eraser.ts. A route passes
 * the list it erases; a store joins by adding its eraser there.
 */
import { sha256Hex } from "../../../shared-model/src";
import type { Env } from "../env";
import { withinTime } from "../history/history-client";
import type { Settings } from "../settings";

/** The `[vars]` erasure reads. */
export const ERASURE_SETTINGS = ["HISTORY_TIMEOUT_MS"] as const;
/** Parsed {@link ERASURE_SETTINGS}. */
export type ErasureSettings = Pick<Settings, (typeof ERASURE_SETTINGS)[number]>;

/** One store that can erase an account's data. */
export interface Eraser {
  /** Stable name in the audit log and the answer, e.g. "account-history". */
  scope: string;
  /** Erases and returns counts of what went (never the data itself). */
  erase(env: Env, accountRef: string, settings: ErasureSettings): Promise<Record<string, number>>;
}

/** The account's payment history (its Durable Object: history and expiry alarm). */
export const accountHistoryEraser: Eraser = {
  scope: "account-history",
  async erase(env, accountRef, settings) {
    const stub = env.ACCOUNT_HISTORY.get(env.ACCOUNT_HISTORY.idFromName(accountRef));
    const before = await withinTime(stub.erase(), settings.HISTORY_TIMEOUT_MS);
    return { keptPayments: before.keptPayments, foldedPayments: before.foldedPayments };
  },
};

/** Outcome of {@link eraseAccount}. */
export type ErasureOutcome =
  | { ok: true; eventId: number; at: string; erased: Record<string, Record<string, number>> }
  | { ok: false; stage: "log"; error: unknown }
  | { ok: false; stage: "erase"; eventId: number; scope: string; error: unknown };

/**
 * Logs the request, then runs each eraser in order; stops at the first failure (the log says which).
 *
 * @example
 * const outcome = await eraseAccount(env, settings, "ops-ana", "acct-00497", [accountHistoryEraser]);
 */
export async function eraseAccount(env: Env, settings: ErasureSettings, actor: string, accountRef: string, erasers: readonly Eraser[]): Promise<ErasureOutcome> {
  const at = new Date().toISOString();
  const scopes = erasers.map((e) => e.scope);
  let eventId: number;
  try {
    const row = await env.DB.prepare("INSERT INTO erasure_events (at, actor, subject_sha256, scopes) VALUES (?1, ?2, ?3, ?4) RETURNING id")
      .bind(at, actor, await sha256Hex(accountRef), JSON.stringify(scopes))
      .first<{ id: number }>();
    if (!row) throw new Error("erasure_events insert returned no row id");
    eventId = row.id;
  } catch (error) {
    return { ok: false, stage: "log", error };
  }
  const erased: Record<string, Record<string, number>> = {};
  for (const eraser of erasers) {
    try {
      erased[eraser.scope] = await eraser.erase(env, accountRef, settings);
    } catch (error) {
      await settle(env, eventId, "failed", { failedScope: eraser.scope, erased, error: String(error) });
      return { ok: false, stage: "erase", eventId, scope: eraser.scope, error };
    }
  }
  await settle(env, eventId, "done", { erased });
  return { ok: true, eventId, at, erased };
}

/** Best effort: a row left at `requested` says the outcome is unknown, never that data remain hidden. */
async function settle(env: Env, eventId: number, outcome: "done" | "failed", detail: object): Promise<void> {
  try {
    await env.DB.prepare("UPDATE erasure_events SET outcome = ?2, detail = ?3 WHERE id = ?1").bind(eventId, outcome, JSON.stringify(detail)).run();
  } catch (error) {
    console.error(JSON.stringify({ event: "erasure-event-update-failed", eventId, outcome, error: String(error) }));
  }
}
