/**
 * The durable memory of transaction ids: a SQLite-backed Durable Object, one per shard of the id
 * space (see claims.ts). It answers, atomically for a whole batch of ids, whether each id is seen
 * for the first time, again with the same content, or again with different content, and keeps each
 * id for the idempotency window from its first sight; an alarm deletes what has aged out.
 *
 * A Durable Object runs one call at a time per object and its storage is strongly consistent, so two
 * isolates claiming one id at the same instant cannot both see "first" (which D1, one region away,
 * or KV, eventually consistent, could not promise).
 */
import { DurableObject } from "cloudflare:workers";

/** One id to claim: the transaction id and the SHA-256 of its content. */
export interface ClaimRequest {
  transactionId: string;
  contentHash: string;
}

/** What the store knew about an id when it was claimed. */
export type ClaimVerdict =
  | { kind: "first" }
  /** Seen with the same content; `answer` is what was kept for it (JSON chosen by the caller: the answer and its review item), null while the first call is still in flight or never finished. */
  | { kind: "repeat"; answer: string | null }
  /** Seen with other content: refuse. `firstSeenMs` is when the id was first seen. */
  | { kind: "conflict"; firstSeenMs: number; firstContentHash: string };

/** What to keep for an id once it has been answered and its review item handed off (JSON text). */
export interface RememberRequest extends ClaimRequest {
  answer: string;
}

/** Alarms run at most this often: expired ids are deleted in batches, not one by one. */
const MIN_SWEEP_INTERVAL_MS = 60_000;

interface SeenRow extends Record<string, SqlStorageValue> {
  content_hash: string;
  first_seen_ms: number;
  answer_json: string | null;
}

/** The Durable Object class (exported from the worker's main module; bound as IDEMPOTENCY). */
export class IdempotencyObject extends DurableObject<unknown> {
  private readonly sql: SqlStorage;
  /** The window stored in `settings`, as this instance knows it (read once, written when it changes). */
  private storedWindowMs: number | null;
  /** True once this instance knows an alarm is set (the sweep re-arms itself while ids are held). */
  private alarmKnownSet = false;

  constructor(ctx: DurableObjectState, env: unknown) {
    super(ctx, env);
    this.sql = ctx.storage.sql;
    this.sql.exec(`CREATE TABLE IF NOT EXISTS seen (
      transaction_id TEXT PRIMARY KEY,
      content_hash TEXT NOT NULL,
      first_seen_ms INTEGER NOT NULL,
      answer_json TEXT,
      conflicts INTEGER NOT NULL DEFAULT 0
    )`);
    this.sql.exec("CREATE INDEX IF NOT EXISTS seen_by_time ON seen (first_seen_ms)");
    this.sql.exec("CREATE TABLE IF NOT EXISTS settings (name TEXT PRIMARY KEY, value INTEGER NOT NULL)");
    this.storedWindowMs = this.sql.exec<{ value: number }>("SELECT value FROM settings WHERE name = 'window_ms'").toArray()[0]?.value ?? null;
  }

  /**
   * Claims ids, in order (a later request for an id claimed earlier in the same call sees it).
   * An id older than `windowMs` counts as never seen.
   */
  async claim(requests: ClaimRequest[], nowMs: number, windowMs: number): Promise<ClaimVerdict[]> {
    const verdicts = this.ctx.storage.transactionSync(() =>
      requests.map((request): ClaimVerdict => {
        const row = this.sql.exec<SeenRow>("SELECT content_hash, first_seen_ms, answer_json FROM seen WHERE transaction_id = ?", request.transactionId).toArray()[0];
        if (row && row.first_seen_ms > nowMs - windowMs) {
          if (row.content_hash === request.contentHash) return { kind: "repeat", answer: row.answer_json };
          this.sql.exec("UPDATE seen SET conflicts = conflicts + 1 WHERE transaction_id = ?", request.transactionId);
          return { kind: "conflict", firstSeenMs: row.first_seen_ms, firstContentHash: row.content_hash };
        }
        this.sql.exec(
          "INSERT OR REPLACE INTO seen (transaction_id, content_hash, first_seen_ms, answer_json, conflicts) VALUES (?, ?, ?, NULL, 0)",
          request.transactionId,
          request.contentHash,
          nowMs,
        );
        return { kind: "first" };
      }),
    );
    // On the hot path: the window is written only when it changes and the alarm looked up once per
    // instance (the sweep re-arms itself while ids are held), not a read and a write on every call.
    if (this.storedWindowMs !== windowMs) {
      this.sql.exec("INSERT OR REPLACE INTO settings (name, value) VALUES ('window_ms', ?)", windowMs);
      this.storedWindowMs = windowMs;
    }
    if (!this.alarmKnownSet) {
      if ((await this.ctx.storage.getAlarm()) === null) await this.ctx.storage.setAlarm(nowMs + windowMs);
      this.alarmKnownSet = true;
    }
    return verdicts;
  }

  /** Keeps the answers given for ids claimed with the same content; the first answer kept wins. */
  async remember(requests: RememberRequest[]): Promise<void> {
    this.ctx.storage.transactionSync(() => {
      for (const r of requests) {
        this.sql.exec("UPDATE seen SET answer_json = ? WHERE transaction_id = ? AND content_hash = ? AND answer_json IS NULL", r.answer, r.transactionId, r.contentHash);
      }
    });
  }

  /** Deletes ids past the window and sets the next alarm for the oldest one left. */
  override async alarm(): Promise<void> {
    const now = Date.now();
    this.alarmKnownSet = false;
    const windowMs = this.sql.exec<{ value: number }>("SELECT value FROM settings WHERE name = 'window_ms'").toArray()[0]?.value;
    if (windowMs === undefined) return;
    this.sql.exec("DELETE FROM seen WHERE first_seen_ms <= ?", now - windowMs);
    const oldest = this.sql.exec<{ oldest: number | null }>("SELECT MIN(first_seen_ms) AS oldest FROM seen").toArray()[0]?.oldest ?? null;
    if (oldest !== null) {
      await this.ctx.storage.setAlarm(Math.max(oldest + windowMs, now + MIN_SWEEP_INTERVAL_MS));
      this.alarmKnownSet = true;
    }
  }

  /** Ids held right now (tests and operators). */
  async size(): Promise<number> {
    return this.sql.exec<{ n: number }>("SELECT COUNT(*) AS n FROM seen").toArray()[0].n;
  }
}
