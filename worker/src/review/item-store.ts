/**
 * Reads for the payment view: the stored item with its queue line, the account's recent flags and
 * the audit trail, in one D1 batch.
 */
import type { Reason } from "../../../shared-model/src";
import type { Env } from "../env";
import type { AuditAction, AuditEvent, ConflictView, HistoryRow, Outcome } from "./contract";
import { STATUS_COLUMNS, stateOf, type StatusRow } from "./queue-store";
import { HISTORY_LIMIT } from "./settings";

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
  reasons: Reason[];
  logDensity: number;
  cutoffMahalanobisSq: number;
  inclusionProbability: number;
  receivedAt: string;
  history: HistoryRow[];
  events: AuditEvent[];
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
  const [itemResult, historyResult, eventResult, conflictResult] = await env.DB.batch([
    env.DB.prepare(
      `SELECT ${prefixed}, i.features_json, i.log_density, i.cutoff_mahalanobis_sq, i.reasons_json, i.inclusion_probability, i.received_at ` +
        "FROM review_status s JOIN review_items i ON i.id = s.item_id WHERE s.item_id = ?1",
    ).bind(id),
    env.DB.prepare(
      `SELECT ${STATUS_COLUMNS} FROM review_status WHERE account_ref = (SELECT account_ref FROM review_status WHERE item_id = ?1) ` +
        "AND item_id != ?1 ORDER BY scored_ms DESC LIMIT ?2",
    ).bind(id, HISTORY_LIMIT),
    env.DB.prepare("SELECT id, at, actor, action, from_outcome, to_outcome, note, model_version FROM review_events WHERE item_id = ?1 ORDER BY id").bind(id),
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
    reasons: parseArray(row.reasons_json) as Reason[],
    logDensity: row.log_density,
    cutoffMahalanobisSq: row.cutoff_mahalanobis_sq,
    inclusionProbability: row.inclusion_probability,
    receivedAt: row.received_at,
    history: (historyResult.results as StatusRow[]).map((h) => ({
      id: h.item_id,
      transactionId: h.transaction_id,
      scoredAt: new Date(h.scored_ms).toISOString(),
      tailProbability: h.tail_probability,
      amount: h.amount,
      selection: h.selection,
      state: stateOf(h, nowMs),
      outcome: h.outcome,
    })),
    events: (eventResult.results as EventRow[]).map((e) => ({
      id: e.id,
      at: e.at,
      actor: e.actor,
      action: e.action,
      fromOutcome: e.from_outcome,
      toOutcome: e.to_outcome,
      note: e.note,
      modelVersion: e.model_version,
    })),
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
