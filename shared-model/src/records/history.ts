/**
 * One account's payment history as the derivations need it: the payments inside the longest window
 * plus the accepted lateness, in time order, and running totals of everything older. Plain JSON,
 * so a Durable Object (or any store) can keep it as it is; bounded by the payments the account made
 * in that span, never by its lifetime.
 */
import { longestWindowMs, type RecordSpec } from "./spec";
import { RecordInputError, type PaymentRecord } from "./record";

/** One payment kept in full: its id (for repeats), time, and the values windows and means read. */
export interface HistoryEntry {
  id: string;
  timeMs: number;
  values: Record<string, number | string>;
}

/** One account's history (JSON-serialisable). */
export interface AccountHistory {
  /** Payments kept in full, in time order (equal times in arrival order). */
  entries: HistoryEntry[];
  /** Payments folded into the totals below: they lie before every window a later payment can open. */
  foldedCount: number;
  /** Sum of each `vsMean` column over the folded payments. */
  foldedSums: Record<string, number>;
  /** Time of the latest folded payment, or null when none was folded. */
  foldedLatestMs: number | null;
}

/**
 * A history with no payments (a new account).
 * @example emptyHistory() // { entries: [], foldedCount: 0, foldedSums: {}, foldedLatestMs: null }
 */
export function emptyHistory(): AccountHistory {
  return { entries: [], foldedCount: 0, foldedSums: {}, foldedLatestMs: null };
}

/** What the spec needs kept of each payment, worked out once per spec. */
export interface HistoryPlan {
  /** Columns whose values entries keep (`sum`, `distinct`, `vsMean`). */
  keptColumns: string[];
  /** Columns whose folded sums are kept (`vsMean`). */
  meanColumns: string[];
  /** Longest window (ms), 0 when there is none. */
  windowMs: number;
}

const plans = new WeakMap<RecordSpec, HistoryPlan>();

/**
 * The spec's {@link HistoryPlan} (cached per spec object).
 * @example historyPlan(spec).keptColumns // ["amount", "shipTo"]
 */
export function historyPlan(spec: RecordSpec): HistoryPlan {
  let plan = plans.get(spec);
  if (plan === undefined) {
    const kept = new Set<string>();
    const means = new Set<string>();
    for (const { derivation: d } of spec.features) {
      if (d.kind === "sum" || d.kind === "distinct") kept.add(d.column);
      if (d.kind === "vsMean") {
        kept.add(d.column);
        means.add(d.column);
      }
    }
    plan = { keptColumns: [...kept], meanColumns: [...means], windowMs: longestWindowMs(spec.features) };
    plans.set(spec, plan);
  }
  return plan;
}

/**
 * Time of the account's latest payment held (kept or folded), or null for an empty history.
 * @example latestPaymentMs(emptyHistory()) // null
 */
export function latestPaymentMs(history: AccountHistory): number | null {
  const last = history.entries.length > 0 ? history.entries[history.entries.length - 1].timeMs : null;
  if (last === null) return history.foldedLatestMs;
  return history.foldedLatestMs === null ? last : Math.max(last, history.foldedLatestMs);
}

/**
 * Whether the history has expired for a payment at `timeMs`: the account was idle for longer than
 * the spec's retention, so the payment is derived as the account's first.
 * @example isExpired(spec, history, latest + spec.retentionMs + 1) // true
 */
export function isExpired(spec: RecordSpec, history: AccountHistory, timeMs: number): boolean {
  const latest = latestPaymentMs(history);
  return latest !== null && timeMs - latest > spec.retentionMs;
}

/**
 * Refuses a payment that arrives so late that payments its windows need were already folded.
 * @throws {RecordInputError} on the spec's time field
 */
export function assertDerivable(spec: RecordSpec, history: AccountHistory, timeMs: number): void {
  const folded = history.foldedLatestMs;
  const plan = historyPlan(spec);
  // Windows include their start, so a folded payment exactly at timeMs − window would be missed.
  if (folded !== null && !(plan.windowMs > 0 ? folded < timeMs - plan.windowMs : folded < timeMs)) {
    throw new RecordInputError(
      spec.record?.time ?? "time",
      `is too far before the account's latest payment (${new Date(latestPaymentMs(history)!).toISOString()}): ` +
        `a payment may arrive at most ${spec.latenessMs / 60_000} minutes late; got ${new Date(timeMs).toISOString()}`,
    );
  }
}

/**
 * Number of entries with time strictly before `timeMs`: the payments a payment at `timeMs` may see
 * (with `sameTimeToo`, also those at `timeMs`: where a new payment is inserted).
 * @example entriesBefore(history.entries, t) // 3
 */
export function entriesBefore(entries: readonly HistoryEntry[], timeMs: number, sameTimeToo = false): number {
  let lo = 0;
  let hi = entries.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (entries[mid].timeMs < timeMs || (sameTimeToo && entries[mid].timeMs === timeMs)) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/**
 * Adds the payment to the history in time order (after payments of the same time), then folds what
 * no window can reach any more: entries older than the latest payment minus the longest window
 * minus the lateness. A history idle for longer than the retention is emptied first.
 * @returns false (and changes nothing) when a payment with the same id is already held
 * @throws {RecordInputError} when the payment is later than the lateness allows (see {@link assertDerivable})
 * @example recordPayment(spec, history, record) // true
 */
export function recordPayment(spec: RecordSpec, history: AccountHistory, record: PaymentRecord): boolean {
  if (isExpired(spec, history, record.timeMs)) Object.assign(history, emptyHistory());
  if (history.entries.some((entry) => entry.id === record.id)) return false;
  assertDerivable(spec, history, record.timeMs);
  const plan = historyPlan(spec);
  const values: Record<string, number | string> = {};
  for (const column of plan.keptColumns) values[column] = record.values[column];
  history.entries.splice(entriesBefore(history.entries, record.timeMs, true), 0, { id: record.id, timeMs: record.timeMs, values });
  foldOld(spec, history, plan);
  return true;
}

function foldOld(spec: RecordSpec, history: AccountHistory, plan: HistoryPlan): void {
  const entries = history.entries;
  const cutoff = entries[entries.length - 1].timeMs - plan.windowMs - spec.latenessMs;
  let folded = 0;
  while (folded < entries.length && entries[folded].timeMs < cutoff) {
    const entry = entries[folded];
    history.foldedCount += 1;
    for (const column of plan.meanColumns) history.foldedSums[column] = (history.foldedSums[column] ?? 0) + (entry.values[column] as number);
    history.foldedLatestMs = history.foldedLatestMs === null ? entry.timeMs : Math.max(history.foldedLatestMs, entry.timeMs);
    folded += 1;
  }
  if (folded > 0) entries.splice(0, folded);
}
