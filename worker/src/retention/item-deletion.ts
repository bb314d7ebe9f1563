/**
 * Deleting review items with everything hung on them, for retention and erasure alike: the queue
 * line (with its note and the note an undo would restore), the item (features, reasons, scores)
 * and the content of its audit events, which become tombstones that keep their digests
 * (audit/audit-chain.ts). One D1 batch is one transaction: an item goes whole or not at all, and a
 * decision racing the deletion either lands before it (and its event is erased with the rest) or
 * finds no item (404) and writes nothing.
 *
 * The ids of a batch are staged in `privacy_batch` (filled and emptied inside the same
 * transaction), so a statement never binds more values than D1 allows.
 */
import { sealAuditTrail } from "../audit/audit-chain";
import type { Env } from "../env";

/** Why events were erased (the tombstone's `erased_by`). */
export type ErasedBy = "erasure" | "retention";

const STAGED = "SELECT item_id FROM privacy_batch";

/** Counts of one deletion: of items, of the notes they held, of audit events erased. */
export interface ItemDeletionCounts {
  items: number;
  notes: number;
  events: number;
}

/**
 * The statements that delete the staged items, to run right after `stage` (an `INSERT INTO
 * privacy_batch (item_id) SELECT …` chosen by the caller) and before any `extra` statement of the
 * caller's (which may read `privacy_batch`, e.g. to count into a run's row). The last statement
 * empties the stage again.
 *
 * @returns the statements and where their counts will be in the batch's results.
 */
export function itemDeletionBatch(
  env: Pick<Env, "DB">,
  stage: D1PreparedStatement,
  erasedBy: ErasedBy,
  atIso: string,
  extra: readonly D1PreparedStatement[] = [],
): { statements: D1PreparedStatement[]; countsAt: number } {
  const statements = [
    env.DB.prepare("DELETE FROM privacy_batch"),
    stage,
    env.DB.prepare(
      `SELECT (SELECT COUNT(*) FROM privacy_batch) AS items, ` +
        `(SELECT COUNT(*) FROM review_status WHERE item_id IN (${STAGED}) AND (note IS NOT NULL OR json_extract(undo_json, '$.note') IS NOT NULL)) AS notes, ` +
        `(SELECT COUNT(*) FROM review_events WHERE item_id IN (${STAGED})) AS events`,
    ),
    ...extra,
    env.DB.prepare(
      "UPDATE review_events SET item_id = NULL, actor = NULL, from_outcome = NULL, to_outcome = NULL, note = NULL, model_version = NULL, " +
        `erased_at = ?1, erased_by = ?2 WHERE item_id IN (${STAGED})`,
    ).bind(atIso, erasedBy),
    env.DB.prepare(`DELETE FROM review_status WHERE item_id IN (${STAGED})`),
    env.DB.prepare(`DELETE FROM review_items WHERE id IN (${STAGED})`),
    env.DB.prepare("DELETE FROM privacy_batch"),
  ];
  return { statements, countsAt: 2 };
}

/**
 * Attempts at a batch that met events written (and not yet sealed) since the seal before it. Only
 * events of the batch's own items can refuse it, so each retry means an action on those very items
 * landed in between: a bounded number, since each needs a live claim.
 */
const SEAL_ATTEMPTS = 16;

/**
 * Runs a deletion batch. An event can only be erased once sealed (the trigger of migration 0011
 * refuses otherwise, and the whole batch rolls back), so the trail is sealed first, and sealed
 * again and the batch retried when an analyst's action slipped an event in between.
 *
 * @example
 * const { statements, countsAt } = itemDeletionBatch(env, stage, "erasure", at);
 * const results = await runSealedBatch(env, statements);
 */
export async function runSealedBatch(env: Pick<Env, "DB">, statements: D1PreparedStatement[]): Promise<D1Result[]> {
  for (let attempt = 1; ; attempt++) {
    await sealAuditTrail(env);
    try {
      return await env.DB.batch(statements);
    } catch (error) {
      if (attempt >= SEAL_ATTEMPTS || !/only sealed once/.test(String(error))) throw error;
    }
  }
}

/** Reads the counts row of a batch run by {@link runSealedBatch}. */
export function deletionCounts(results: readonly D1Result[], countsAt: number): ItemDeletionCounts {
  const row = (results[countsAt]?.results?.[0] ?? {}) as Partial<ItemDeletionCounts>;
  return { items: Number(row.items ?? 0), notes: Number(row.notes ?? 0), events: Number(row.events ?? 0) };
}
