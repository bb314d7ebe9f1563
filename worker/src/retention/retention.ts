/**
 * The retention run (the cron, or `POST /v1/retention/run`): deletes personal data older than
 * RETENTION_DAYS, in batches, each batch one D1 transaction that also adds its counts to the run's
 * row in `retention_runs`. A run cut short (the worker stopped, a batch failed) has lost nothing:
 * what it deleted is counted, what it did not is still there, and the next run carries on from
 * the database as it stands.
 *
 * - Decided review items, RETENTION_DAYS after the decision, with their notes and audit content
 *   (tombstones keep the chain): only those a finished label export holds. The others are kept and
 *   the run says how many and why, because deleting labels nobody exported would take them from
 *   the next refit for good.
 * - Payment conflicts and shadow scores, RETENTION_DAYS after they were recorded or scored.
 * - Undecided items stay: they are work in the queue, not history.
 * - Account histories expire in their Durable Objects under the same setting (history/).
 */
import type { RetentionRun } from "../contract/privacy";
import type { Env } from "../env";
import { readSettings, type Settings } from "../settings";
import { deletionCounts, itemDeletionBatch, runSealedBatch } from "./item-deletion";

/** The `[vars]` a retention run reads. */
export const RETENTION_SETTINGS = ["RETENTION_DAYS"] as const;
/** Items (or conflicts, or shadow scores) per D1 transaction. */
export const RETENTION_BATCH = 200;
/** Batches one run does at most; the rest waits for the next run (status `more`). */
export const RETENTION_MAX_BATCHES = 250;
/**
 * An export that started at T holds the items decided before T minus this margin: a decision's
 * time is the worker's clock when it was asked, and it commits a moment later.
 */
export const EXPORT_COMMIT_MARGIN_MS = 5 * 60_000;
/** A run still `running` after this long was cut short (the cron's wall time is far below it). */
const STALE_RUN_MS = 60 * 60_000;
const DAY_MS = 86_400_000;

/**
 * SQL condition on a `review_status s` line: a finished label export (of every version, or of the
 * item's own) started more than {@link EXPORT_COMMIT_MARGIN_MS} (bound at `marginParameter`) after
 * the decision, so the export holds the label.
 *
 * @example `... WHERE s.decided = 1 AND ${heldByFinishedExport("?2")}`
 */
export function heldByFinishedExport(marginParameter: string): string {
  return (
    `EXISTS (SELECT 1 FROM label_exports e WHERE e.finished_at IS NOT NULL AND e.started_ms - ${marginParameter} > s.decided_ms ` +
    "AND (e.model_version IS NULL OR e.model_version = s.model_version))"
  );
}

const COVERED = heldByFinishedExport("?2");

/**
 * Runs retention once; never throws (a failure is stored on the run's row and logged).
 *
 * @param runBy the cron expression, or the admin's user name.
 * @example ctx.waitUntil(runRetention(env, controller.cron, new Date(controller.scheduledTime)));
 */
export async function runRetention(env: Env, runBy: string, now: Date): Promise<RetentionRun | { status: "failed"; detail: { error: string } }> {
  let runId: number | null = null;
  try {
    const settings: Pick<Settings, "RETENTION_DAYS"> = readSettings(env, RETENTION_SETTINGS);
    const cutoffMs = now.getTime() - settings.RETENTION_DAYS * DAY_MS;
    const cutoffAt = new Date(cutoffMs).toISOString();
    await env.DB.prepare("UPDATE retention_runs SET status = 'interrupted' WHERE status = 'running' AND started_at < ?1")
      .bind(new Date(now.getTime() - STALE_RUN_MS).toISOString())
      .run();
    const row = await env.DB.prepare("INSERT INTO retention_runs (started_at, run_by, retention_days, cutoff_at) VALUES (?1, ?2, ?3, ?4) RETURNING id")
      .bind(now.toISOString(), runBy, settings.RETENTION_DAYS, cutoffAt)
      .first<{ id: number }>();
    if (!row) throw new Error("retention_runs insert returned no row id");
    const id = row.id;
    runId = id;
    let batches = 0;
    const more = () => batches < RETENTION_MAX_BATCHES;
    while (more() && (await deleteItemBatch(env, id, cutoffMs, now.toISOString())) === RETENTION_BATCH) batches++;
    for (const table of OLDER_ROWS) {
      while (more() && (await deleteOlderRows(env, id, table, cutoffAt)) === RETENTION_BATCH) batches++;
    }
    const kept = await keptUnexported(env, cutoffMs);
    const detail = kept.count > 0 ? { reason: keptReason(kept.count, settings.RETENTION_DAYS, kept.lastFinishedExportAt), lastFinishedExportAt: kept.lastFinishedExportAt } : null;
    await env.DB.prepare("UPDATE retention_runs SET status = ?2, finished_at = ?3, kept_unexported = ?4, detail = ?5 WHERE id = ?1")
      .bind(id, more() ? "done" : "more", new Date().toISOString(), kept.count, detail && JSON.stringify(detail))
      .run();
    const run = await readRun(env, id);
    console.log(JSON.stringify({ event: "retention-run", id, status: run.status, deleted: run.deleted, keptUnexported: run.keptUnexported }));
    return run;
  } catch (error) {
    console.error(JSON.stringify({ event: "retention-run-failed", runId, error: String(error) }));
    const detail = { error: String(error) };
    if (runId !== null) {
      try {
        await env.DB.prepare("UPDATE retention_runs SET status = 'failed', finished_at = ?2, detail = ?3 WHERE id = ?1")
          .bind(runId, new Date().toISOString(), JSON.stringify(detail))
          .run();
        return await readRun(env, runId);
      } catch (storeError) {
        console.error(JSON.stringify({ event: "retention-run-store-failed", runId, error: String(storeError) }));
      }
    }
    return { status: "failed", detail };
  }
}

/** One batch of covered items past the cutoff; returns how many went. */
async function deleteItemBatch(env: Env, runId: number, cutoffMs: number, atIso: string): Promise<number> {
  const stage = env.DB.prepare(
    "INSERT INTO privacy_batch (item_id) SELECT s.item_id FROM review_status s INDEXED BY review_status_by_decision " +
      `WHERE s.decided = 1 AND s.decided_ms < ?1 AND ${COVERED} ORDER BY s.decided_ms, s.item_id LIMIT ?3`,
  ).bind(cutoffMs, EXPORT_COMMIT_MARGIN_MS, RETENTION_BATCH);
  const count = env.DB.prepare(
    "UPDATE retention_runs SET items_deleted = items_deleted + (SELECT COUNT(*) FROM privacy_batch), " +
      "notes_deleted = notes_deleted + (SELECT COUNT(*) FROM review_status WHERE item_id IN (SELECT item_id FROM privacy_batch) AND (note IS NOT NULL OR json_extract(undo_json, '$.note') IS NOT NULL)), " +
      "events_erased = events_erased + (SELECT COUNT(*) FROM review_events WHERE item_id IN (SELECT item_id FROM privacy_batch)) WHERE id = ?1",
  ).bind(runId);
  const { statements, countsAt } = itemDeletionBatch(env, stage, "retention", atIso, [count]);
  return deletionCounts(await runSealedBatch(env, statements), countsAt).items;
}

/** Tables whose rows go RETENTION_DAYS after their own time, and the run's column that counts them. */
const OLDER_ROWS = [
  { table: "payment_conflicts", time: "at", counter: "conflicts_deleted" },
  { table: "shadow_scores", time: "scored_at", counter: "shadow_scores_deleted" },
] as const;

/** One batch of a table's rows older than the cutoff, counted in the same transaction. */
async function deleteOlderRows(env: Env, runId: number, target: (typeof OLDER_ROWS)[number], cutoffAt: string): Promise<number> {
  const older = `SELECT id FROM ${target.table} WHERE ${target.time} < ?2 ORDER BY ${target.time} LIMIT ?3`;
  const [, deleted] = await env.DB.batch([
    env.DB.prepare(`UPDATE retention_runs SET ${target.counter} = ${target.counter} + (SELECT COUNT(*) FROM (${older})) WHERE id = ?1`).bind(runId, cutoffAt, RETENTION_BATCH),
    env.DB.prepare(`DELETE FROM ${target.table} WHERE id IN (${older})`).bind(runId, cutoffAt, RETENTION_BATCH),
  ]);
  return deleted.meta.changes ?? 0;
}

/** Decided items past the cutoff that no finished export holds, and the latest finished export. */
async function keptUnexported(env: Env, cutoffMs: number): Promise<{ count: number; lastFinishedExportAt: string | null }> {
  const [kept, last] = await env.DB.batch<{ n?: number; at?: string | null }>([
    env.DB.prepare(`SELECT COUNT(*) AS n FROM review_status s INDEXED BY review_status_by_decision WHERE s.decided = 1 AND s.decided_ms < ?1 AND NOT ${COVERED}`).bind(
      cutoffMs,
      EXPORT_COMMIT_MARGIN_MS,
    ),
    env.DB.prepare("SELECT max(started_at) AS at FROM label_exports WHERE finished_at IS NOT NULL"),
  ]);
  return { count: Number(kept.results[0]?.n ?? 0), lastFinishedExportAt: last.results[0]?.at ?? null };
}

function keptReason(count: number, days: number, lastExportAt: string | null): string {
  const last = lastExportAt ? `the latest finished label export started at ${lastExportAt}` : "no label export has finished yet";
  return (
    `${count} decided item(s) older than ${days} days are kept because no finished label export holds them (${last}); ` +
    "take the labelled set (GET /v1/review/export, to the end) and keep it where your refits read it, then the next run deletes them"
  );
}

interface RunRow {
  id: number;
  started_at: string;
  finished_at: string | null;
  run_by: string;
  retention_days: number;
  cutoff_at: string;
  status: RetentionRun["status"];
  items_deleted: number;
  notes_deleted: number;
  events_erased: number;
  conflicts_deleted: number;
  shadow_scores_deleted: number;
  kept_unexported: number;
  detail: string | null;
}

/** The stored run, as answered. */
export function toRun(row: RunRow): RetentionRun {
  return {
    id: row.id,
    startedAt: row.started_at,
    finishedAt: row.finished_at,
    runBy: row.run_by,
    retentionDays: row.retention_days,
    cutoffAt: row.cutoff_at,
    status: row.status,
    deleted: {
      items: row.items_deleted,
      notes: row.notes_deleted,
      auditEvents: row.events_erased,
      paymentConflicts: row.conflicts_deleted,
      shadowScores: row.shadow_scores_deleted,
    },
    keptUnexported: row.kept_unexported,
    detail: row.detail === null ? null : (JSON.parse(row.detail) as RetentionRun["detail"]),
  };
}

async function readRun(env: Env, id: number): Promise<RetentionRun> {
  const row = await env.DB.prepare("SELECT * FROM retention_runs WHERE id = ?1").bind(id).first<RunRow>();
  if (!row) throw new Error(`retention run ${id} vanished`);
  return toRun(row);
}

/**
 * The latest runs, newest first.
 *
 * @example await recentRetentionRuns(env, 10)
 */
export async function recentRetentionRuns(env: Pick<Env, "DB">, limit: number): Promise<RetentionRun[]> {
  const { results } = await env.DB.prepare("SELECT * FROM retention_runs ORDER BY id DESC LIMIT ?1").bind(limit).all<RunRow>();
  return results.map(toRun);
}
