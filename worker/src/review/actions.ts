/**
 * The four changes an analyst makes — claim, release, decide, undo — each one D1 batch of three
 * statements: the audit row (INSERT … SELECT under a condition), the state change (UPDATE under the
 * same condition) and a read of the resulting line. D1 runs a batch as one transaction, statement
 * after statement, so both writes see the same row and either both happen or neither: there is no
 * state change without its audit row and no audit row without its change. Two analysts racing for
 * one item are serialised by D1; the second finds the condition false and gets a 409 naming the
 * holder.
 *
 * Each audit row is sealed into the trail's hash chain right after its batch (audit/audit-chain.ts).
 *
 * Two bounds keep one item's trail from growing without limit: renewing a live claim of your own
 * extends it without a new audit row (the row of the claim already says who holds the item), and
 * one analyst may decide or undo on one item at most {@link DECISION_CHANGE_LIMIT} times within
 * {@link DECISION_CHANGE_WINDOW_MS}; past that the change is refused with 429 and the time it may
 * be retried (no state change, no audit row).
 */
import { sealAuditTrail } from "../audit/audit-chain";
import type { Env, Problem } from "../env";
import type { ClaimView, Outcome } from "../contract";
import { STATUS_COLUMNS, stateOf, type StatusRow } from "./queue-store";
import { CLAIM_TTL_MS, DECISION_CHANGE_LIMIT, DECISION_CHANGE_WINDOW_MS, UNDO_WINDOW_MS } from "./settings";

/** Who acts, and when. */
export interface Actor {
  user: string;
  role: "analyst" | "admin" | "flow";
  nowMs: number;
}

export type ActionResult = { ok: true; row: StatusRow } | { ok: false; status: 404 | 409 | 429; error: string; problems: Problem[]; claim?: ClaimView; retryAfterSeconds?: number };

const EVENT_COLUMNS = "(item_id, at, actor, action, from_outcome, to_outcome, note, model_version)";
const LIVE_CLAIM_BY_OTHER = (row: StatusRow, actor: Actor) =>
  row.claimed_by !== null && row.claimed_by !== actor.user && row.claim_expires_ms !== null && row.claim_expires_ms > actor.nowMs;

/**
 * Runs one change: `event` and `update` must both be guarded by the same `condition` (which uses
 * ?1 = item id, ?2 = now ms, ?3 = user); the remaining parameters are shared by both.
 * `eventOnlyIf` narrows the audit row further (a change that needs no row of its own).
 */
async function change(
  env: Pick<Env, "DB">,
  id: number,
  actor: Actor,
  condition: string,
  event: string,
  update: string,
  extra: unknown[],
  eventOnlyIf = "1",
): Promise<{ changed: boolean; row: StatusRow | null }> {
  const params = [id, actor.nowMs, actor.user, ...extra];
  const insertSql = `INSERT INTO review_events ${EVENT_COLUMNS} ${event} FROM review_status WHERE ${condition} AND ${eventOnlyIf}`;
  const updateSql = `UPDATE review_status SET ${update} WHERE ${condition}`;
  const [, updated, read] = await env.DB.batch([
    env.DB.prepare(insertSql).bind(...params.slice(0, highestParameter(insertSql))),
    env.DB.prepare(updateSql).bind(...params.slice(0, highestParameter(updateSql))),
    env.DB.prepare(`SELECT ${STATUS_COLUMNS} FROM review_status WHERE item_id = ?1`).bind(id),
  ]);
  const row = (read.results[0] as StatusRow | undefined) ?? null;
  const changed = (updated.meta.changes ?? 0) > 0;
  if (changed) await sealQuietly(env);
  return { changed, row };
}

/**
 * Seals the event just written into the audit chain (audit/audit-chain.ts). The change has landed
 * whatever happens here: a failed seal is logged and the next action, cron run or verify seals it.
 */
async function sealQuietly(env: Pick<Env, "DB">): Promise<void> {
  try {
    await sealAuditTrail(env);
  } catch (error) {
    console.error(JSON.stringify({ event: "audit-seal-failed", error: String(error) }));
  }
}

/**
 * Takes an item for CLAIM_TTL_MS (15 min): allowed when nobody holds a live claim on it, or the
 * caller does (a renewal). Decided items can be claimed too, to change the decision, unless
 * `undecidedOnly` (deciding several together never changes an earlier decision): then a decided
 * item is refused with 409 `already-decided`.
 */
export async function claimItem(env: Pick<Env, "DB">, id: number, actor: Actor, undecidedOnly = false): Promise<ActionResult> {
  const atIso = new Date(actor.nowMs).toISOString();
  const { changed, row } = await change(
    env,
    id,
    actor,
    `item_id = ?1 AND (claimed_by IS NULL OR claim_expires_ms <= ?2 OR claimed_by = ?3)${undecidedOnly ? " AND decided = 0" : ""}`,
    "SELECT item_id, ?4, ?3, 'claim', NULL, NULL, NULL, model_version",
    "claimed_by = ?3, claim_expires_ms = ?5",
    [atIso, actor.nowMs + CLAIM_TTL_MS],
    // A renewal of one's own live claim writes no row (the statement sees the line before the update).
    "NOT coalesce(claimed_by = ?3 AND claim_expires_ms > ?2, 0)",
  );
  if (changed && row) return { ok: true, row };
  if (undecidedOnly && row?.decided === 1 && !LIVE_CLAIM_BY_OTHER(row, actor)) return alreadyDecided(id, row);
  return refusal(id, row, actor, "claim");
}

/** The 409 for an item that was decided before the caller got to it (never overwritten unasked). */
export function alreadyDecided(id: number, row: StatusRow): ActionResult & { ok: false } {
  const when = row.decided_ms === null ? "" : ` at ${new Date(row.decided_ms).toISOString()}`;
  return {
    ok: false,
    status: 409,
    error: "already-decided",
    problems: [{ field: "id", rule: `item ${id} was already decided ${row.outcome} by ${row.decided_by}${when}; open it on its own to change that decision` }],
  };
}

/** Hands a claimed item back. The holder may release it; an admin may release anyone's claim. */
export async function releaseItem(env: Pick<Env, "DB">, id: number, actor: Actor): Promise<ActionResult> {
  const atIso = new Date(actor.nowMs).toISOString();
  const { changed, row } = await change(
    env,
    id,
    actor,
    "item_id = ?1 AND claim_expires_ms > ?2 AND (claimed_by = ?3 OR ?5 = 'admin')",
    "SELECT item_id, ?4, ?3, 'release', NULL, NULL, NULL, model_version",
    "claimed_by = NULL, claim_expires_ms = NULL",
    [atIso, actor.role],
  );
  if (changed && row) return { ok: true, row };
  return refusal(id, row, actor, "release");
}

/**
 * Records a decision under the caller's live claim and ends the claim. The previous decision (if
 * any) is kept for UNDO_WINDOW_MS so its author can restore it; the audit row carries from → to.
 */
export async function decideItem(env: Pick<Env, "DB">, id: number, actor: Actor, outcome: Outcome, note: string | null): Promise<ActionResult> {
  const limited = await decisionChangeLimit(env, id, actor);
  if (limited) return limited;
  const atIso = new Date(actor.nowMs).toISOString();
  const { changed, row } = await change(
    env,
    id,
    actor,
    "item_id = ?1 AND claimed_by = ?3 AND claim_expires_ms > ?2",
    "SELECT item_id, ?4, ?3, 'decide', outcome, ?5, ?6, model_version",
    "undo_json = json_object('decided', decided, 'outcome', outcome, 'note', note, 'decided_by', decided_by, 'decided_ms', decided_ms), " +
      "decided = 1, outcome = ?5, note = ?6, decided_by = ?3, decided_ms = ?2, claimed_by = NULL, claim_expires_ms = NULL, " +
      "undo_by = ?3, undo_until_ms = ?7",
    [atIso, outcome, note, actor.nowMs + UNDO_WINDOW_MS],
  );
  if (changed && row) return { ok: true, row };
  return refusal(id, row, actor, "decide");
}

/**
 * Reverts the caller's latest decision on the item within UNDO_WINDOW_MS: the previous standing
 * (no decision, or the earlier one) comes back and the caller holds the item again for a new
 * decision. Refused when someone else has claimed it since.
 */
export async function undoDecision(env: Pick<Env, "DB">, id: number, actor: Actor): Promise<ActionResult> {
  const limited = await decisionChangeLimit(env, id, actor);
  if (limited) return limited;
  const atIso = new Date(actor.nowMs).toISOString();
  const { changed, row } = await change(
    env,
    id,
    actor,
    "item_id = ?1 AND undo_by = ?3 AND undo_until_ms > ?2 AND (claimed_by IS NULL OR claim_expires_ms <= ?2 OR claimed_by = ?3)",
    "SELECT item_id, ?4, ?3, 'undo', outcome, json_extract(undo_json, '$.outcome'), NULL, model_version",
    "decided = json_extract(undo_json, '$.decided'), outcome = json_extract(undo_json, '$.outcome'), " +
      "note = json_extract(undo_json, '$.note'), decided_by = json_extract(undo_json, '$.decided_by'), " +
      "decided_ms = json_extract(undo_json, '$.decided_ms'), claimed_by = ?3, claim_expires_ms = ?5, " +
      "undo_json = NULL, undo_by = NULL, undo_until_ms = NULL",
    [atIso, actor.nowMs + CLAIM_TTL_MS],
  );
  if (changed && row) return { ok: true, row };
  return refusal(id, row, actor, "undo");
}

/**
 * The 429 refusal when the actor has decided or undone on this item DECISION_CHANGE_LIMIT times
 * within the window, else null. Read before the change: two changes of one analyst on one item
 * cannot both pass the claim condition, so the bound holds without a lock.
 */
async function decisionChangeLimit(env: Pick<Env, "DB">, id: number, actor: Actor): Promise<ActionResult | null> {
  const since = new Date(actor.nowMs - DECISION_CHANGE_WINDOW_MS).toISOString();
  const row = await env.DB.prepare(
    "SELECT COUNT(*) AS n, MIN(at) AS oldest FROM (SELECT at FROM review_events INDEXED BY review_events_by_actor " +
      "WHERE item_id = ?1 AND actor = ?2 AND action IN ('decide', 'undo') AND at > ?3 ORDER BY at DESC LIMIT ?4)",
  )
    .bind(id, actor.user, since, DECISION_CHANGE_LIMIT)
    .first<{ n: number; oldest: string | null }>();
  if (!row || row.n < DECISION_CHANGE_LIMIT || row.oldest === null) return null;
  const freeAtMs = Date.parse(row.oldest) + DECISION_CHANGE_WINDOW_MS;
  const retryAfterSeconds = Math.max(1, Math.ceil((freeAtMs - actor.nowMs) / 1000));
  return {
    ok: false,
    status: 429,
    error: "too-many-decision-changes",
    problems: [
      {
        field: "id",
        rule:
          `you have decided or undone on item ${id} ${row.n} times in the last ${DECISION_CHANGE_WINDOW_MS / 60_000} minutes (at most ${DECISION_CHANGE_LIMIT}); ` +
          `retry after ${retryAfterSeconds} s (at ${new Date(freeAtMs).toISOString()}), or ask another analyst to review it`,
      },
    ],
    retryAfterSeconds,
  };
}

/** D1 refuses more bound values than the statement's highest `?N`; unused lower numbers are fine. */
function highestParameter(sql: string): number {
  let highest = 0;
  for (const match of sql.matchAll(/\?(\d+)/g)) highest = Math.max(highest, Number(match[1]));
  return highest;
}

/** Explains why a change did not happen, from the line as it stands. */
function refusal(id: number, row: StatusRow | null, actor: Actor, action: "claim" | "release" | "decide" | "undo"): ActionResult {
  if (!row) return { ok: false, status: 404, error: "not-found", problems: [{ field: "id", rule: `no review item has id ${id}` }] };
  if (LIVE_CLAIM_BY_OTHER(row, actor)) {
    const claim = { by: row.claimed_by!, until: new Date(row.claim_expires_ms!).toISOString() };
    const verb = { claim: "claim", release: "release", decide: "decide", undo: "undo a decision on" }[action];
    return {
      ok: false,
      status: 409,
      error: "claimed-by-another",
      problems: [{ field: "id", rule: `is claimed by ${claim.by} until ${claim.until}; you cannot ${verb} it before then unless they release it` }],
      claim,
    };
  }
  if (action === "release") {
    return { ok: false, status: 409, error: "not-claimed-by-you", problems: [{ field: "id", rule: "holds no live claim of yours to release" }] };
  }
  if (action === "decide") {
    const expired = row.claimed_by === actor.user && row.claim_expires_ms !== null && stateOf(row, actor.nowMs) !== "claimed";
    const when = expired ? `; your claim expired at ${new Date(row.claim_expires_ms!).toISOString()}` : "";
    return {
      ok: false,
      status: 409,
      error: "claim-required",
      problems: [{ field: "id", rule: `needs your live claim before a decision: POST /v1/review/items/${id}/claim first${when}` }],
    };
  }
  if (action === "undo") {
    return {
      ok: false,
      status: 409,
      error: "nothing-to-undo",
      problems: [{ field: "id", rule: `has no decision of yours from the last ${UNDO_WINDOW_MS / 60_000} minutes to undo` }],
    };
  }
  // A claim refused without a live claim by another cannot happen (the condition would have held);
  // answer as a conflict rather than pretend it succeeded.
  return { ok: false, status: 409, error: "conflict", problems: [{ field: "id", rule: "changed while the claim was being taken; try again" }] };
}
