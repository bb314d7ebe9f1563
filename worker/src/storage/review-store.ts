/**
 * D1 statements of the review store. Inserts are idempotent (`ON CONFLICT … DO NOTHING` on the
 * natural keys), so a queue redelivery or a payment scored twice never makes a second row.
 * Query functions take `env` first, SQL uses numbered `?N` parameters.
 */
import type { Env } from "../env";
import type { ConflictMessage, ReviewMessage, ShadowMessage } from "./messages";

/**
 * SQL condition, true unless the account (SHA-256 hex bound at `subject`) was erased from the review
 * store at or after the time bound at `time`: a payment scored before an erasure and delivered after
 * it (the queue is at-least-once and may lag) must not bring the account back.
 */
const notErasedSince = (subject: string, time: string) =>
  `NOT EXISTS (SELECT 1 FROM erasure_events WHERE ${subject} IS NOT NULL AND subject_sha256 = ${subject} AND at >= ${time} AND scopes LIKE '%"review-store"%')`;

const INSERT_REVIEW_ITEM = `INSERT INTO review_items (
  transaction_id, model_version, segment, account_ref, features_json, log_density, mahalanobis_sq,
  tail_probability, cutoff_mahalanobis_sq, reasons_json, selection, inclusion_probability, scored_at, received_at, log10_tail_probability
) SELECT ?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15 WHERE ${notErasedSince("?16", "?13")}
ON CONFLICT (transaction_id, model_version) DO NOTHING`;

const INSERT_SHADOW_SCORE = `INSERT INTO shadow_scores (
  transaction_id, live_version, shadow_version, live_segment, shadow_segment, live_flagged, shadow_flagged,
  live_mahalanobis_sq, shadow_mahalanobis_sq, live_tail_probability, shadow_tail_probability, scored_at
) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)
ON CONFLICT (transaction_id, shadow_version) DO NOTHING`;

/**
 * Prepares the idempotent insert of one review item.
 *
 * @param receivedAt ISO-8601 time the consumer writes it.
 * @param subjectSha256 SHA-256 hex of the item's accountRef (null without one): an account erased
 *   since the payment was scored is not written back.
 * @example
 * await env.DB.batch([reviewItemInsert(env, message, new Date().toISOString(), null)]);
 */
export function reviewItemInsert(env: Pick<Env, "DB">, item: ReviewMessage, receivedAt: string, subjectSha256: string | null): D1PreparedStatement {
  return env.DB.prepare(INSERT_REVIEW_ITEM).bind(
    item.transactionId,
    item.modelVersion,
    item.segment,
    item.accountRef,
    JSON.stringify(item.features),
    item.logDensity,
    item.mahalanobisSq,
    item.tailProbability,
    item.cutoffMahalanobisSq,
    JSON.stringify(item.reasons),
    item.selection,
    item.inclusionProbability,
    item.scoredAt,
    receivedAt,
    item.log10TailProbability ?? null,
    subjectSha256,
  );
}

/**
 * Prepares the idempotent insert of one shadow comparison.
 *
 * @example
 * await env.DB.batch([shadowScoreInsert(env, message)]);
 */
export function shadowScoreInsert(env: Pick<Env, "DB">, item: ShadowMessage): D1PreparedStatement {
  return env.DB.prepare(INSERT_SHADOW_SCORE).bind(
    item.transactionId,
    item.liveVersion,
    item.shadowVersion,
    item.liveSegment,
    item.shadowSegment,
    item.liveFlagged ? 1 : 0,
    item.shadowFlagged ? 1 : 0,
    item.liveMahalanobisSq,
    item.shadowMahalanobisSq,
    item.liveTailProbability,
    item.shadowTailProbability,
    item.scoredAt,
  );
}

const INSERT_CONFLICT = `INSERT INTO payment_conflicts (
  transaction_id, first_seen_at, at, first_content_hash, content_hash, model_version, segment, account_ref, features_json
) SELECT ?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9 WHERE ${notErasedSince("?10", "?3")}
ON CONFLICT (transaction_id, at, content_hash) DO NOTHING`;

/**
 * Prepares the idempotent insert of one conflicting repeat.
 *
 * @example
 * await env.DB.batch([conflictInsert(env, message, await sha256Hex(message.accountRef))]);
 */
export function conflictInsert(env: Pick<Env, "DB">, item: ConflictMessage, subjectSha256: string | null): D1PreparedStatement {
  return env.DB.prepare(INSERT_CONFLICT).bind(
    item.transactionId,
    item.firstSeenAt,
    item.at,
    item.firstContentHash,
    item.contentHash,
    item.modelVersion,
    item.segment,
    item.accountRef,
    JSON.stringify(item.features),
    subjectSha256,
  );
}

/** Actions recorded in `model_events`. */
export type ModelEventAction = "upload" | "activate" | "rollback" | "shadow-set" | "shadow-clear";

/** A change to the published models, as recorded before it is made. */
export interface ModelEvent {
  actor: string;
  action: ModelEventAction;
  fromVersion: string | null;
  toVersion: string | null;
  detail?: string | null;
  /** ISO-8601. */
  at: string;
}

/**
 * Appends a model event (outcome `applied`) and returns its row id. Called before the change, so
 * that no change can take effect without its row; {@link markModelEventFailed} corrects the row
 * when the change then fails.
 *
 * @throws the D1 error when the row cannot be written (the caller then makes no change).
 * @example
 * const id = await recordModelEvent(env, { actor: "ops-ana", action: "activate", fromVersion: "m1", toVersion: "m2", at: new Date().toISOString() });
 */
export async function recordModelEvent(env: Pick<Env, "DB">, event: ModelEvent): Promise<number> {
  const row = await env.DB.prepare("INSERT INTO model_events (at, actor, action, from_version, to_version, detail) VALUES (?1, ?2, ?3, ?4, ?5, ?6) RETURNING id")
    .bind(event.at, event.actor, event.action, event.fromVersion, event.toVersion, event.detail ?? null)
    .first<{ id: number }>();
  if (!row) throw new Error("model_events insert returned no row id");
  return row.id;
}

/**
 * Marks a model event as failed (the change it announced did not take effect). Best effort: a
 * failure here is logged by the caller, the row then overstates what happened, never understates.
 *
 * @example
 * await markModelEventFailed(env, id, "KV put failed");
 */
export async function markModelEventFailed(env: Pick<Env, "DB">, id: number, detail: string): Promise<void> {
  await env.DB.prepare("UPDATE model_events SET outcome = 'failed', detail = ?2 WHERE id = ?1").bind(id, detail).run();
}
