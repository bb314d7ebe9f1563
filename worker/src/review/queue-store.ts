/**
 * Reads of the review queue: pages in any supported order with keyset paging, per-state counts,
 * facets, the day's figures. Every page walks one index (see migration 0002); every count scans
 * the covering counts index only. Query functions take `env` first; SQL uses numbered parameters.
 */
import type { Env } from "../env";
import type { DaySummary, Facets, QueueRow, ReviewState, Selection, SortDirection, SortKey, StateCounts } from "../contract";
import { encodeCursor, type CursorPosition } from "./cursor";
import { utcDayStart } from "./settings";

const DAY_MS = 86_400_000;

/** Filters shared by the list and the counts; undefined means "any". */
export interface QueueFilters {
  segment?: string;
  modelVersion?: string;
  selection?: Selection;
  /** Inclusive lower bound on scored time, ms. */
  fromMs?: number;
  /** Exclusive upper bound on scored time, ms. */
  toMs?: number;
}

export interface PageRequest extends QueueFilters {
  state: ReviewState;
  sort: SortKey;
  direction: SortDirection;
  limit: number;
  after: CursorPosition | null;
}

/** Column holding each order's sort value; all are NOT NULL, so keyset comparisons need no NULL cases. */
const SORT_COLUMN: Record<SortKey, string> = {
  priority: "priority_base",
  tail: "log10_tail_probability",
  amount: "amount_at_risk",
  age: "scored_ms",
};

/** Row of review_status as read by the queue. */
export interface StatusRow {
  item_id: number;
  transaction_id: string;
  model_version: string;
  segment: string;
  selection: Selection;
  account_ref: string | null;
  tail_probability: number;
  /** log10 of the tail probability; {@link UNKNOWN_LOG10_TAIL} where it is not known. */
  log10_tail_probability: number;
  mahalanobis_sq: number;
  amount: number | null;
  amount_at_risk: number;
  scored_ms: number;
  priority_base: number;
  decided: number;
  claimed_by: string | null;
  claim_expires_ms: number | null;
  outcome: "fraud" | "legitimate" | null;
  note: string | null;
  decided_by: string | null;
  decided_ms: number | null;
  undo_json: string | null;
  undo_by: string | null;
  undo_until_ms: number | null;
}

/** Columns of {@link StatusRow}, for SELECT lists. */
export const STATUS_COLUMNS =
  "item_id, transaction_id, model_version, segment, selection, account_ref, tail_probability, log10_tail_probability, mahalanobis_sq, amount, amount_at_risk, " +
  "scored_ms, priority_base, decided, claimed_by, claim_expires_ms, outcome, note, decided_by, decided_ms, undo_json, undo_by, undo_until_ms";

/**
 * Stored log10 tail for rows written before the scorer sent it whose tail probability had underflowed
 * to 0 (migration 0008): unknown, but below 1e-308, so they sort as the rarest and the API says null.
 */
export const UNKNOWN_LOG10_TAIL = -1e308;

/** The row's log10 tail probability, or null where it is not known. */
export function log10TailOf(row: Pick<StatusRow, "log10_tail_probability">): number | null {
  return row.log10_tail_probability <= UNKNOWN_LOG10_TAIL ? null : row.log10_tail_probability;
}

/** Where a row stands at `nowMs`. */
export function stateOf(row: Pick<StatusRow, "decided" | "claim_expires_ms">, nowMs: number): ReviewState {
  if (row.decided === 1) return "decided";
  return row.claim_expires_ms !== null && row.claim_expires_ms > nowMs ? "claimed" : "open";
}

/** Maps a status row to its queue line at `nowMs`. */
export function toQueueRow(row: StatusRow, nowMs: number): QueueRow {
  const state = stateOf(row, nowMs);
  return {
    id: row.item_id,
    transactionId: row.transaction_id,
    modelVersion: row.model_version,
    segment: row.segment,
    accountRef: row.account_ref,
    selection: row.selection,
    tailProbability: row.tail_probability,
    log10TailProbability: log10TailOf(row),
    mahalanobisSq: row.mahalanobis_sq,
    amount: row.amount,
    scoredAt: new Date(row.scored_ms).toISOString(),
    priority: row.priority_base + nowMs / DAY_MS,
    state,
    // A decided item can be claimed again to change the decision, so the claim stands on its own.
    claim:
      row.claimed_by !== null && row.claim_expires_ms !== null && row.claim_expires_ms > nowMs ? { by: row.claimed_by, until: new Date(row.claim_expires_ms).toISOString() } : null,
    decision: row.decided === 1 ? { outcome: row.outcome!, by: row.decided_by!, at: new Date(row.decided_ms!).toISOString(), note: row.note } : null,
  };
}

/** Filter SQL and its parameters, numbered from `first`. */
function filterClause(filters: QueueFilters, first: number): { sql: string; params: unknown[] } {
  const parts: string[] = [];
  const params: unknown[] = [];
  const add = (sql: string, value: unknown) => {
    params.push(value);
    parts.push(sql.replace("?", `?${first + params.length - 1}`));
  };
  if (filters.segment !== undefined) add("segment = ?", filters.segment);
  if (filters.modelVersion !== undefined) add("model_version = ?", filters.modelVersion);
  if (filters.selection !== undefined) add("selection = ?", filters.selection);
  if (filters.fromMs !== undefined) add("scored_ms >= ?", filters.fromMs);
  if (filters.toMs !== undefined) add("scored_ms < ?", filters.toMs);
  return { sql: parts.map((p) => ` AND ${p}`).join(""), params };
}

/**
 * The SQL of one page and its parameters (fetches limit + 1 rows to learn whether a next page
 * exists). Exposed so tests can check its query plan.
 * @example buildPageQuery({ state: "open", sort: "tail", direction: "asc", limit: 50, after: null }, Date.now()).sql
 */
export function buildPageQuery(request: PageRequest, nowMs: number): { sql: string; params: unknown[] } {
  const column = SORT_COLUMN[request.sort];
  const order = request.direction === "asc" ? "ASC" : "DESC";
  // ?1 decided flag, ?2 now, ?3 limit + 1; keyset values and filters follow.
  const params: unknown[] = [request.state === "decided" ? 1 : 0, nowMs, request.limit + 1];
  let where = "decided = ?1";
  if (request.state === "open") where += " AND (claim_expires_ms IS NULL OR claim_expires_ms <= ?2)";
  if (request.state === "claimed") where += " AND claim_expires_ms > ?2";
  if (request.after) {
    params.push(request.after.value, request.after.id);
    where += ` AND (${column}, item_id) ${request.direction === "asc" ? ">" : "<"} (?4, ?5)`;
  }
  const filters = filterClause(request, params.length + 1);
  params.push(...filters.params);
  // Claimed lines are few (live claims only): find them by the claim column, then sort them.
  const index = request.state === "claimed" ? "INDEXED BY review_status_counts" : `INDEXED BY review_status_by_${request.sort}`;
  const sql = `SELECT ${STATUS_COLUMNS} FROM review_status ${index} WHERE ${where}${filters.sql} ` + `ORDER BY ${column} ${order}, item_id ${order} LIMIT ?3`;
  return { sql, params };
}

/**
 * One page of the queue and the cursor for the next.
 * @example await listPage(env, { state: "open", sort: "priority", direction: "desc", limit: 50, after: null }, Date.now())
 */
export async function listPage(env: Pick<Env, "DB">, request: PageRequest, nowMs: number): Promise<{ rows: QueueRow[]; nextCursor: string | null }> {
  const { sql, params } = buildPageQuery(request, nowMs);
  const { results } = await env.DB.prepare(sql)
    .bind(...params)
    .all<StatusRow>();
  const more = results.length > request.limit;
  const page = more ? results.slice(0, request.limit) : results;
  const last = page[page.length - 1];
  const nextCursor =
    more && last
      ? encodeCursor({
          sort: request.sort,
          direction: request.direction,
          state: request.state,
          value: sortValue(last, request.sort),
          id: last.item_id,
        })
      : null;
  return { rows: page.map((row) => toQueueRow(row, nowMs)), nextCursor };
}

function sortValue(row: StatusRow, sort: SortKey): number {
  switch (sort) {
    case "priority":
      return row.priority_base;
    case "tail":
      return row.log10_tail_probability;
    case "amount":
      return row.amount_at_risk;
    case "age":
      return row.scored_ms;
  }
}

/** The SQL of the per-state counts and its parameters (for query-plan tests). */
export function buildCountQuery(filters: QueueFilters, nowMs: number): { sql: string; params: unknown[] } {
  const clause = filterClause(filters, 2);
  const sql =
    "SELECT coalesce(sum(decided = 1), 0) AS decided, " +
    "coalesce(sum(decided = 0 AND claim_expires_ms > ?1), 0) AS claimed, " +
    "coalesce(sum(decided = 0 AND (claim_expires_ms IS NULL OR claim_expires_ms <= ?1)), 0) AS open " +
    `FROM review_status INDEXED BY review_status_counts WHERE 1${clause.sql}`;
  return { sql, params: [nowMs, ...clause.params] };
}

/**
 * Items per state under the filters, at `nowMs` (an expired claim counts as open).
 * @example await countStates(env, { segment: "web" }, Date.now()) // { open: 9812, claimed: 3, decided: 187 }
 */
export async function countStates(env: Pick<Env, "DB">, filters: QueueFilters, nowMs: number): Promise<StateCounts> {
  const { sql, params } = buildCountQuery(filters, nowMs);
  const row = await env.DB.prepare(sql)
    .bind(...params)
    .first<StateCounts>();
  return { open: row?.open ?? 0, claimed: row?.claimed ?? 0, decided: row?.decided ?? 0 };
}

/** Distinct segments and model versions in the store (at most 500 of each), for the filter menus. */
export async function listFacets(env: Pick<Env, "DB">): Promise<Facets> {
  const [segments, versions] = await env.DB.batch<{ value: string }>([
    env.DB.prepare("SELECT DISTINCT segment AS value FROM review_items ORDER BY segment LIMIT 500"),
    env.DB.prepare("SELECT DISTINCT model_version AS value FROM review_items ORDER BY model_version DESC LIMIT 500"),
  ]);
  return { segments: segments.results.map((r) => r.value), modelVersions: versions.results.map((r) => r.value) };
}

/**
 * The day's figures: decisions standing from today (UTC), mine among them, and the queue now.
 * @example await daySummary(env, "rivera", Date.now(), 200)
 */
export async function daySummary(env: Pick<Env, "DB">, user: string, nowMs: number, capacityPerAnalyst: number): Promise<DaySummary> {
  const dayStart = utcDayStart(nowMs);
  const today = await env.DB.prepare(
    "SELECT count(*) AS decided, coalesce(sum(decided_by = ?2), 0) AS mine FROM review_status INDEXED BY review_status_by_decision " + "WHERE decided = 1 AND decided_ms >= ?1",
  )
    .bind(dayStart, user)
    .first<{ decided: number; mine: number }>();
  const counts = await countStates(env, {}, nowMs);
  return {
    day: new Date(dayStart).toISOString().slice(0, 10),
    decidedToday: today?.decided ?? 0,
    decidedTodayByMe: today?.mine ?? 0,
    open: counts.open,
    claimed: counts.claimed,
    capacityPerAnalyst,
  };
}
