/**
 * Reads for the payment view: the stored item with its queue line, the account's recent flags and
 * the audit trail, in one D1 batch.
 */
import type { Env } from "../env";
import type { AuditAction, ConflictView, EventPage, HistoryRow, Outcome, WireReason } from "../contract";
import { log10TailOf, STATUS_COLUMNS, stateOf, type StatusRow } from "./queue-store";
import { EVENT_PAGE, HISTORY_LIMIT } from "./settings";

/** The review_items columns the payment view needs beyond the queue line. */
interface ItemRow {
  features_json: string;
  log_density: number;
  cutoff_mahalanobis_sq: number;
  reasons_json: string;
  inclusion_probability: number;
  received_at: string;
}

interface EventRow {
  id: number;
  at: string;
  actor: string;
  action: AuditAction;
  from_outcome: Outcome | null;
  to_outcome: Outcome | null;
  note: string | null;
  model_version: string;
}

interface ConflictRow {
  at: string;
  first_seen_at: string;
  model_version: string;
  segment: string | null;
  account_ref: string | null;
  features_json: string;
}

/** Conflicting repeats shown on the payment view. */
const CONFLICTS_SHOWN = 20;

export interface StoredItem {
  status: StatusRow;
  features: Record<string, unknown>;
  reasons: WireReason[];
  logDensity: number;
  cutoffMahalanobisSq: number;
  inclusionProbability: number;
  receivedAt: string;
  history: HistoryRow[];
  /** The newest page of the audit trail. */
  trail: EventPage;
  conflicts: ConflictView[];
}

/**
 * Everything stored about one item, or null when no item has that id.
 * @example const stored = await readItem(env, 42, Date.now());
 */
export async function readItem(env: Pick<Env, "DB">, id: number, nowMs: number): Promise<StoredItem | null> {
  const prefixed = STATUS_COLUMNS.split(", ")
    .map((c) => `s.${c}`)
    .join(", ");
  const [itemResult, historyResult, eventResult, countResult, conflictResult] = await env.DB.batch([
    env.DB.prepare(
      `SELECT ${prefixed}, i.features_json, i.log_density, i.cutoff_mahalanobis_sq, i.reasons_json, i.inclusion_probability, i.received_at ` +
        "FROM review_status s JOIN review_items i ON i.id = s.item_id WHERE s.item_id = ?1",
    ).bind(id),
    env.DB.prepare(
      `SELECT ${STATUS_COLUMNS} FROM review_status WHERE account_ref = (SELECT account_ref FROM review_status WHERE item_id = ?1) ` +
        "AND item_id != ?1 ORDER BY scored_ms DESC LIMIT ?2",
    ).bind(id, HISTORY_LIMIT),
    ...eventPageStatements(env, id, null, EVENT_PAGE),
    env.DB.prepare(
      "SELECT at, first_seen_at, model_version, segment, account_ref, features_json FROM payment_conflicts " +
        "WHERE transaction_id = (SELECT transaction_id FROM review_status WHERE item_id = ?1) ORDER BY id DESC LIMIT ?2",
    ).bind(id, CONFLICTS_SHOWN),
  ]);
  const row = itemResult.results[0] as (StatusRow & ItemRow) | undefined;
  if (!row) return null;
  return {
    status: row,
    features: parseObject(row.features_json),
    reasons: parseArray(row.reasons_json) as WireReason[],
    logDensity: row.log_density,
    cutoffMahalanobisSq: row.cutoff_mahalanobis_sq,
    inclusionProbability: row.inclusion_probability,
    receivedAt: row.received_at,
    history: (historyResult.results as StatusRow[]).map((h) => ({
      id: h.item_id,
      transactionId: h.transaction_id,
      scoredAt: new Date(h.scored_ms).toISOString(),
      tailProbability: h.tail_probability,
      log10TailProbability: log10TailOf(h),
      amount: h.amount,
      selection: h.selection,
      state: stateOf(h, nowMs),
      outcome: h.outcome,
    })),
    trail: toEventPage(eventResult.results as EventRow[], countResult.results as { n: number }[], EVENT_PAGE),
    conflicts: (conflictResult.results as ConflictRow[]).map((c) => ({
      at: c.at,
      firstSeenAt: c.first_seen_at,
      modelVersion: c.model_version,
      segment: c.segment,
      accountRef: c.account_ref,
      features: parseObject(c.features_json) as Record<string, number>,
    })),
  };
}

/** The two statements of one page of an item's trail: the events (one more than asked, to know if there are older ones) and the count. */
function eventPageStatements(env: Pick<Env, "DB">, id: number, before: number | null, limit: number): D1PreparedStatement[] {
  return [
    env.DB.prepare(
      "SELECT id, at, actor, action, from_outcome, to_outcome, note, model_version FROM review_events INDEXED BY review_events_by_item " +
        "WHERE item_id = ?1 AND id < ?2 ORDER BY id DESC LIMIT ?3",
    ).bind(id, before ?? Number.MAX_SAFE_INTEGER, limit + 1),
    env.DB.prepare("SELECT COUNT(*) AS n FROM review_events INDEXED BY review_events_by_item WHERE item_id = ?1").bind(id),
  ];
}

function toEventPage(rows: EventRow[], count: { n: number }[], limit: number): EventPage {
  const page = rows.slice(0, limit);
  return {
    events: page.map((e) => ({
      id: e.id,
      at: e.at,
      actor: e.actor,
      action: e.action,
      fromOutcome: e.from_outcome,
      toOutcome: e.to_outcome,
      note: e.note,
      modelVersion: e.model_version,
    })),
    count: Number(count[0]?.n ?? 0),
    nextBefore: rows.length > limit ? page[page.length - 1].id : null,
  };
}

/**
 * One page of an item's audit trail, newest first: events with an id below `before` (all when null).
 * Null when no item has that id.
 * @example const page = await readEvents(env, 42, null, 20);
 */
export async function readEvents(env: Pick<Env, "DB">, id: number, before: number | null, limit: number): Promise<EventPage | null> {
  const [exists, events, count] = await env.DB.batch([
    env.DB.prepare("SELECT 1 AS found FROM review_status WHERE item_id = ?1").bind(id),
    ...eventPageStatements(env, id, before, limit),
  ]);
  if (exists.results.length === 0) return null;
  return toEventPage(events.results as EventRow[], count.results as { n: number }[], limit);
}

function parseObject(text: string): Record<string, unknown> {
  try {
    const value: unknown = JSON.parse(text);
    return value && typeof value === "object" && !Array.isArray(value) ? (value as Record<string, unknown>) : {};
  } catch {
    return {};
  }
}

function parseArray(text: string): unknown[] {
  try {
    const value: unknown = JSON.parse(text);
    return Array.isArray(value) ? value : [];
  } catch {
    return [];
  }
}
