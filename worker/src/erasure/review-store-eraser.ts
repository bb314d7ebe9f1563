/**
 * Erases one account from the review store (D1): its review items with their queue lines, notes
 * and audit content (tombstones keep the chain, audit/audit-chain.ts), its payment conflicts, and
 * the shadow scores of its payments. Whole items at a time, in batches (retention/item-deletion.ts),
 * each one D1 transaction.
 */
import type { Env } from "../env";
import { EXPORT_COMMIT_MARGIN_MS, heldByFinishedExport } from "../retention/retention";
import { deletionCounts, itemDeletionBatch, runSealedBatch } from "../retention/item-deletion";
import type { Eraser } from "./erase-account";

/** Items erased per D1 transaction. */
const ERASURE_BATCH = 200;

const STAGED_TRANSACTIONS = "SELECT transaction_id FROM review_items WHERE id IN (SELECT item_id FROM privacy_batch)";

/** The account's rows in D1. Counts: items, notes, audit events, conflicts, shadow scores, and labels already in finished exports. */
export const reviewStoreEraser: Eraser = {
  scope: "review-store",
  async erase(env: Env, accountRef: string) {
    const totals = { items: 0, notes: 0, auditEvents: 0, paymentConflicts: 0, shadowScores: 0, labelsInFinishedExports: 0 };
    const at = new Date().toISOString();
    for (;;) {
      const stage = env.DB.prepare("INSERT INTO privacy_batch (item_id) SELECT id FROM review_items WHERE account_ref = ?1 ORDER BY id LIMIT ?2").bind(accountRef, ERASURE_BATCH);
      const extra = [
        // Labels that left isodense in an export before this erasure: the operator must erase them there.
        env.DB.prepare(`SELECT COUNT(*) AS n FROM review_status s WHERE s.item_id IN (SELECT item_id FROM privacy_batch) AND s.decided = 1 AND ${heldByFinishedExport("?1")}`).bind(
          EXPORT_COMMIT_MARGIN_MS,
        ),
        env.DB.prepare(
          `DELETE FROM shadow_scores WHERE transaction_id IN (${STAGED_TRANSACTIONS}) OR transaction_id IN (SELECT transaction_id FROM payment_conflicts WHERE account_ref = ?1)`,
        ).bind(accountRef),
        env.DB.prepare(`DELETE FROM payment_conflicts WHERE account_ref = ?1 OR transaction_id IN (${STAGED_TRANSACTIONS})`).bind(accountRef),
      ];
      const { statements, countsAt } = itemDeletionBatch(env, stage, "erasure", at, extra);
      const results = await runSealedBatch(env, statements);
      const counts = deletionCounts(results, countsAt);
      totals.items += counts.items;
      totals.notes += counts.notes;
      totals.auditEvents += counts.events;
      totals.labelsInFinishedExports += Number((results[countsAt + 1].results[0] as { n?: number } | undefined)?.n ?? 0);
      totals.shadowScores += results[countsAt + 2].meta.changes ?? 0;
      totals.paymentConflicts += results[countsAt + 3].meta.changes ?? 0;
      if (counts.items < ERASURE_BATCH) return totals;
    }
  },
};
