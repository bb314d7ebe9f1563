/**
 * Linked payments: the open flags of one account, seen and decided together. A burst from one
 * account puts a dozen flags in the queue within a minute; the analyst reads them side by side and
 * decides them in one action. Each item still goes through the one-item path — claim (refused when
 * someone else holds it or it is already decided), then decide under that claim — so each gets its
 * own audit rows and label, and a conflict on one item is reported for that item while the rest
 * are decided. Nothing is decided that the analyst did not see: the request names the items.
 */
import type { Env } from "../env";
import { claimItem, decideItem, type Actor, type ActionResult } from "./actions";
import type { AccountDecision, AccountFlags, Outcome } from "../contract";
import { STATUS_COLUMNS, toQueueRow, type StatusRow } from "./queue-store";
import { ACCOUNT_FLAGS_LIMIT } from "./settings";

/**
 * The undecided items (open, or claimed by anyone) of the account of item `id`, oldest first, at
 * most {@link ACCOUNT_FLAGS_LIMIT}; null when the item does not exist.
 */
export async function readAccountFlags(env: Pick<Env, "DB">, id: number, nowMs: number): Promise<AccountFlags | null> {
  const anchor = await env.DB.prepare("SELECT account_ref FROM review_status WHERE item_id = ?1").bind(id).first<{ account_ref: string | null }>();
  if (!anchor) return null;
  if (anchor.account_ref === null) return { accountRef: null, items: [], more: false };
  const { results } = await env.DB.prepare(
    `SELECT ${STATUS_COLUMNS} FROM review_status INDEXED BY review_status_by_account WHERE account_ref = ?1 AND decided = 0 ORDER BY scored_ms, item_id LIMIT ?2`,
  )
    .bind(anchor.account_ref, ACCOUNT_FLAGS_LIMIT + 1)
    .all<StatusRow>();
  const items = results.slice(0, ACCOUNT_FLAGS_LIMIT).map((row) => toQueueRow(row, nowMs));
  return { accountRef: anchor.account_ref, items, more: results.length > ACCOUNT_FLAGS_LIMIT };
}

/** Why the whole request was refused (before any item was touched). */
export type AccountDecisionRefusal = { ok: false; status: 404 | 409; error: string; rule: string };

/**
 * Decides the named items of the account of item `anchorId` with one outcome (and note), each as
 * one item would be. Items are taken in the order given; an item of another account, missing,
 * already decided, claimed by someone else or past the decision-change bound is reported in
 * `refused` and left as it is.
 */
export async function decideAccountItems(
  env: Pick<Env, "DB">,
  anchorId: number,
  ids: readonly number[],
  actor: Actor,
  outcome: Outcome,
  note: string | null,
): Promise<{ ok: true; answer: AccountDecision } | AccountDecisionRefusal> {
  const anchor = await env.DB.prepare("SELECT account_ref FROM review_status WHERE item_id = ?1").bind(anchorId).first<{ account_ref: string | null }>();
  if (!anchor) return { ok: false, status: 404, error: "not-found", rule: `no review item has id ${anchorId}` };
  if (anchor.account_ref === null) {
    return { ok: false, status: 409, error: "no-account", rule: `item ${anchorId} carries no account reference; decide it on its own` };
  }
  const accountRef = anchor.account_ref;
  const placeholders = ids.map((_, i) => `?${i + 1}`).join(", ");
  const { results } = await env.DB.prepare(`SELECT item_id, account_ref FROM review_status WHERE item_id IN (${placeholders})`)
    .bind(...ids)
    .all<{ item_id: number; account_ref: string | null }>();
  const accountOf = new Map(results.map((r) => [r.item_id, r.account_ref]));

  const answer: AccountDecision = { accountRef, outcome, decided: [], refused: [] };
  for (const id of ids) {
    if (!accountOf.has(id)) {
      answer.refused.push({ id, error: "not-found", rule: `no review item has id ${id}` });
      continue;
    }
    if (accountOf.get(id) !== accountRef) {
      answer.refused.push({ id, error: "other-account", rule: `item ${id} belongs to another account than item ${anchorId}; decide it on its own` });
      continue;
    }
    const now = Date.now();
    const result = await decideOne(env, id, { ...actor, nowMs: now }, outcome, note);
    if (result.ok) {
      const until = result.row.undo_until_ms;
      answer.decided.push({ item: toQueueRow(result.row, now), undoableUntil: until !== null && until > now ? new Date(until).toISOString() : null });
    } else answer.refused.push({ id, error: result.error, rule: result.problems.map((p) => p.rule).join("; "), ...(result.claim ? { claim: result.claim } : {}) });
  }
  return { ok: true, answer };
}

/**
 * Claim (undecided only), then decide under that claim. A decision refused after the claim (the
 * decision-change bound) leaves the claim with the analyst, who is working on this account.
 */
async function decideOne(env: Pick<Env, "DB">, id: number, actor: Actor, outcome: Outcome, note: string | null): Promise<ActionResult> {
  const claimed = await claimItem(env, id, actor, true);
  if (!claimed.ok) return claimed;
  return decideItem(env, id, actor, outcome, note);
}
