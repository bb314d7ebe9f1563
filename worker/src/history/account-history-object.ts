/**
 * One account's payment history at the edge: a SQLite-backed Durable Object per account
 * (`idFromName(account)`), so every payment of an account meets the same history, in order.
 *
 * - {@link AccountHistoryObject.deriveAndRecord} derives each payment's raw features from what the
 *   account held before the payment's own time and then records it, all in one synchronous step:
 *   no `await` separates the read from the write, so no other call to this account can interleave
 *   (a Durable Object runs one event at a time, and SQL calls are synchronous).
 * - A repeat of a payment id already held is derived again (same answer) but not recorded twice.
 * - Expiry: an alarm deletes the whole state once the account has been idle (server clock) for the
 *   spec's retention (never shorter than the longest span any derivation looks back), capped by the
 *   operator's RETENTION_DAYS, which also governs review items (docs/privacy.md).
 * - {@link AccountHistoryObject.erase} deletes it on request (the admin erase route).
 *
 * The history is the shared model's `AccountHistory` (plain JSON, bounded by the payments inside
 * the longest window plus the accepted lateness; older ones are folded into running totals).
 */
import { DurableObject } from "cloudflare:workers";
import { deriveInto, emptyHistory, historyHorizonMs, recordPayment, RecordInputError, type AccountHistory, type PaymentRecord, type RecordSpec } from "../../../shared-model/src";
import type { Env } from "../env";
import { readSettings } from "../settings";
import type { HistoryFootprint, HistoryResult } from "./contract";

/** Row layout: one row per object (the account), the history as JSON. */
const SCHEMA = `CREATE TABLE account_history (
  singleton INTEGER PRIMARY KEY CHECK (singleton = 1),
  history TEXT NOT NULL,
  retention_ms REAL NOT NULL,
  last_activity_ms REAL NOT NULL
)`;

interface HistoryRow extends Record<string, SqlStorageValue> {
  history: string;
  retention_ms: number;
  last_activity_ms: number;
}

const DAY_MS = 86_400_000;

/** Specs by key (model version): a spec arrives with every call, this keeps one object per model. */
const MAX_SPECS = 8;

/** The Durable Object class bound as `ACCOUNT_HISTORY` (wrangler.toml). */
export class AccountHistoryObject extends DurableObject<Env> {
  private history: AccountHistory | null = null;
  private readonly specs = new Map<string, RecordSpec>();
  /** Time the alarm is set for, as far as this instance knows (null: not known to be set). */
  private alarmAtMs: number | null = null;

  /** Whether the table exists (created on the first write: an erased account keeps no schema either). */
  private tableReady: boolean | null = null;

  /**
   * Derives each payment from the history before its own time, then records it; in order, as one
   * step. A payment the derivation refuses (too late for the history held, a zero mean) is refused
   * with the field and rule and not recorded.
   *
   * @param specKey identifies `spec` (the model version), so the object keeps one copy per model.
   * @param records payments of this object's account, in the order the caller received them.
   */
  async deriveAndRecord(specKey: string, spec: RecordSpec, records: PaymentRecord[]): Promise<HistoryResult[]> {
    const held = this.specFor(specKey, spec);
    const history = this.load();
    const out = new Float64Array(held.features.length);
    const results: HistoryResult[] = [];
    let changed = false;
    const now = Date.now();
    const retentionMs = Math.min(historyHorizonMs(held), this.retentionCapMs());
    try {
      for (const record of records) {
        try {
          deriveInto(held, history, record, out);
          const recorded = recordPayment(held, history, record);
          changed ||= recorded;
          results.push({ ok: true, raw: Array.from(out), repeat: !recorded });
        } catch (error) {
          if (!(error instanceof RecordInputError)) throw error;
          results.push({ ok: false, field: error.field, rule: error.rule });
        }
      }
      if (changed) this.save(history, retentionMs, now);
    } catch (error) {
      // The copy in memory may hold payments the store did not take: read it afresh next time.
      this.history = null;
      throw error;
    }
    await this.keepAlarm(now + retentionMs);
    return results;
  }

  /** Deletes everything this account holds (history and alarm). */
  async erase(): Promise<HistoryFootprint> {
    const before = await this.footprint();
    await this.ctx.storage.deleteAlarm();
    await this.ctx.storage.deleteAll();
    this.forget();
    return before;
  }

  /** What this account holds: payments, bytes of history and of the whole SQLite database. */
  async footprint(): Promise<HistoryFootprint> {
    const row = this.row();
    const history = row ? (JSON.parse(row.history) as AccountHistory) : null;
    return {
      keptPayments: history?.entries.length ?? 0,
      foldedPayments: history?.foldedCount ?? 0,
      historyBytes: row ? new TextEncoder().encode(row.history).length : 0,
      databaseBytes: this.ctx.storage.sql.databaseSize,
      lastActivityMs: row?.last_activity_ms ?? null,
      alarmAtMs: await this.ctx.storage.getAlarm(),
    };
  }

  /** Expiry: delete the account once it has been idle for its retention, else look again then. */
  override async alarm(): Promise<void> {
    this.alarmAtMs = null;
    const row = this.row();
    if (row === null) return;
    const due = row.last_activity_ms + Math.min(row.retention_ms, this.retentionCapMs());
    if (Date.now() >= due) {
      await this.ctx.storage.deleteAll();
      this.forget();
      return;
    }
    await this.keepAlarm(due);
  }

  /**
   * RETENTION_DAYS in ms: no history outlives the operator's retention, whatever the spec says. A
   * malformed value is logged and leaves the spec's retention in force, because failing every
   * payment of the account would stop screening, not protect anyone.
   */
  private retentionCapMs(): number {
    try {
      return readSettings(this.env, ["RETENTION_DAYS"]).RETENTION_DAYS * DAY_MS;
    } catch (error) {
      console.error(JSON.stringify({ event: "history-retention-setting-unreadable", error: String(error) }));
      return Number.POSITIVE_INFINITY;
    }
  }

  private specFor(key: string, spec: RecordSpec): RecordSpec {
    const held = this.specs.get(key);
    if (held) return held;
    if (this.specs.size >= MAX_SPECS) this.specs.delete(this.specs.keys().next().value as string);
    this.specs.set(key, spec);
    return spec;
  }

  /** After `deleteAll` (which drops the tables too): nothing held, nothing known. */
  private forget(): void {
    this.history = null;
    this.alarmAtMs = null;
    this.tableReady = false;
  }

  private hasTable(): boolean {
    this.tableReady ??= this.ctx.storage.sql.exec("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'account_history'").toArray().length > 0;
    return this.tableReady;
  }

  private row(): HistoryRow | null {
    if (!this.hasTable()) return null;
    const rows = this.ctx.storage.sql.exec<HistoryRow>("SELECT history, retention_ms, last_activity_ms FROM account_history WHERE singleton = 1").toArray();
    return rows[0] ?? null;
  }

  private load(): AccountHistory {
    if (this.history === null) {
      const row = this.row();
      this.history = row ? (JSON.parse(row.history) as AccountHistory) : emptyHistory();
    }
    return this.history;
  }

  private save(history: AccountHistory, retentionMs: number, now: number): void {
    if (!this.hasTable()) {
      this.ctx.storage.sql.exec(SCHEMA);
      this.tableReady = true;
    }
    this.ctx.storage.sql.exec(
      `INSERT INTO account_history (singleton, history, retention_ms, last_activity_ms) VALUES (1, ?1, ?2, ?3)
       ON CONFLICT (singleton) DO UPDATE SET history = excluded.history, retention_ms = excluded.retention_ms, last_activity_ms = excluded.last_activity_ms`,
      JSON.stringify(history),
      retentionMs,
      now,
    );
  }

  /**
   * Makes sure an alarm is set no later than needed. The alarm handler re-reads the last activity
   * and moves itself on, so one alarm per instance is enough: no storage write on every payment
   * (later payments ask for later times, which the alarm already set covers).
   */
  private async keepAlarm(atMs: number): Promise<void> {
    if (this.alarmAtMs !== null && this.alarmAtMs <= atMs) return;
    const current = await this.ctx.storage.getAlarm();
    if (current !== null && current <= atMs) {
      this.alarmAtMs = current;
      return;
    }
    // None set, or one later than needed (RETENTION_DAYS was lowered): bring it forward.
    await this.ctx.storage.setAlarm(atMs);
    this.alarmAtMs = atMs;
  }
}
