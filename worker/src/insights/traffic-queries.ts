/**
 * Reads of the loop's tables: bucket totals and daily volumes for a model version over a window of
 * UTC days, the labelled decisions of a version, and when a version went live. Query functions take
 * `env` first; SQL uses numbered `?N` parameters.
 */
import { onFullyDecidedDays } from "../../../shared-model/src";
import type { Env } from "../env";
import type { TallyModel } from "./tally";
import { SCORE_ROW } from "./tally";
import type { DayVolume, LabelCounts } from "../contract";
export type { DayVolume, LabelCounts };

/** Bucket counts summed over segments and days, aligned with the artifact's reference edges. */
export interface BucketTotals {
  /** `columns[j][b]`: payments whose model column j fell in bucket b. */
  columns: number[][];
  /** Score (d²) buckets. */
  score: number[];
  /** Payments counted (sum of the score buckets). */
  payments: number;
}

/**
 * Sums the drift counts of `version` for days in [fromDay, toDay] (UTC, YYYY-MM-DD).
 *
 * @example
 * const totals = await bucketTotals(env, live, "2026-11-24", "2026-11-30");
 */
export async function bucketTotals(env: Pick<Env, "DB">, model: TallyModel, fromDay: string, toDay: string): Promise<BucketTotals> {
  const { results } = await env.DB.prepare("SELECT name, bucket, SUM(count) AS n FROM drift_counts WHERE model_version = ?1 AND day >= ?2 AND day <= ?3 GROUP BY name, bucket")
    .bind(model.version, fromDay, toDay)
    .all<{ name: string; bucket: number; n: number }>();
  const edges = model.artifact.reference.columnEdges;
  const columns = model.artifact.columns.map((_, j) => new Array<number>((edges[j]?.length ?? 0) + 1).fill(0));
  const score = new Array<number>(model.artifact.reference.scoreEdges.length + 1).fill(0);
  const index = new Map(model.artifact.columns.map((name, j) => [name, j]));
  for (const row of results) {
    const target = row.name === SCORE_ROW ? score : columns[index.get(row.name) ?? -1];
    if (target && row.bucket < target.length) target[row.bucket] += Number(row.n);
  }
  return { columns, score, payments: score.reduce((a, b) => a + b, 0) };
}

/**
 * Daily scored/flagged totals of `version` (all segments) for days in [fromDay, toDay], oldest first.
 *
 * @example
 * await dailyVolumes(env, "m20261201-1f3a9c2e", "2026-11-24", "2026-11-30") // [{ day: "2026-11-24", scored: 9120, flagged: 41 }, …]
 */
export async function dailyVolumes(env: Pick<Env, "DB">, version: string, fromDay: string, toDay: string): Promise<DayVolume[]> {
  const { results } = await env.DB.prepare(
    "SELECT day, SUM(scored) AS scored, SUM(flagged) AS flagged FROM daily_volume WHERE model_version = ?1 AND day >= ?2 AND day <= ?3 GROUP BY day ORDER BY day",
  )
    .bind(version, fromDay, toDay)
    .all<{ day: string; scored: number; flagged: number }>();
  return results.map((r) => ({ day: r.day, scored: Number(r.scored), flagged: Number(r.flagged) }));
}

/**
 * Counts the review items of `version` scored at or after `sinceMs`, by selection and outcome
 * (`open` = not decided yet).
 *
 * @example
 * await labelCounts(env, "m20261201-1f3a9c2e", 0) // { flagged: { fraud: 12, legitimate: 30, open: 4 }, audit: { … } }
 */
export async function labelCounts(env: Pick<Env, "DB">, version: string, sinceMs: number): Promise<LabelCounts> {
  const { results } = await env.DB.prepare(
    "SELECT selection, coalesce(outcome, 'open') AS outcome, COUNT(*) AS n FROM review_status WHERE model_version = ?1 AND scored_ms >= ?2 GROUP BY selection, outcome",
  )
    .bind(version, sinceMs)
    .all<{ selection: "flagged" | "audit"; outcome: "fraud" | "legitimate" | "open"; n: number }>();
  const counts: LabelCounts = { flagged: { fraud: 0, legitimate: 0, open: 0 }, audit: { fraud: 0, legitimate: 0, open: 0 } };
  for (const r of results) counts[r.selection][r.outcome] += Number(r.n);
  return counts;
}

/**
 * When `version` last became live (its latest applied activate or rollback), or null when the
 * event log has no such row (activated before the log existed, or by hand).
 *
 * @example
 * await liveSince(env, "m20261201-1f3a9c2e") // "2026-12-01T09:30:00.000Z"
 */
export async function liveSince(env: Pick<Env, "DB">, version: string): Promise<string | null> {
  const row = await env.DB.prepare("SELECT at FROM model_events WHERE to_version = ?1 AND action IN ('activate', 'rollback') AND outcome = 'applied' ORDER BY id DESC LIMIT 1")
    .bind(version)
    .first<{ at: string }>();
  return row?.at ?? null;
}

/** The labelled decisions of one version, as parallel arrays (one entry per decided item). */
export interface LabelledRows {
  mahalanobisSq: number[];
  /** 1 = fraud, 0 = legitimate. */
  fraud: number[];
  /** 1 / inclusion probability. */
  weight: number[];
  /** 1 = flagged when scored, 0 = audit sample. */
  flagged: number[];
}

/** Most decided items read into one operating table (a year of a busy desk; keeps the answer bounded). */
export const MAX_LABELLED_ROWS = 50_000;

const DAY_MS = 86_400_000;

/**
 * The decided review items scored under any of `versions` (at most 50) on fully decided days: d²,
 * outcome and Horvitz–Thompson weight 1/π. A (version, UTC day) with any item still undecided is
 * left out whole (shared-model `onFullyDecidedDays` says why: decisions that come fraud first bias
 * a half-decided day); `undecided` counts the items still waiting and `heldBack` the decisions left
 * out with them.
 *
 * @example
 * const rows = await labelledRows(env, ["m20261201-1f3a9c2e"]);
 */
export async function labelledRows(env: Pick<Env, "DB">, versions: readonly string[]): Promise<LabelledRows & { undecided: number; heldBack: number }> {
  const list = JSON.stringify(versions.slice(0, 50));
  const [decided, waiting] = await env.DB.batch<{ d2: number; outcome: string; pi: number; selection: string; version: string; day: number; n: number }>([
    env.DB.prepare(
      `SELECT s.mahalanobis_sq AS d2, s.outcome AS outcome, i.inclusion_probability AS pi, s.selection AS selection,
              s.model_version AS version, s.scored_ms / ${DAY_MS} AS day
       FROM review_status s JOIN review_items i ON i.id = s.item_id
       WHERE s.model_version IN (SELECT value FROM json_each(?1)) AND s.decided = 1
       ORDER BY s.item_id LIMIT ?2`,
    ).bind(list, MAX_LABELLED_ROWS),
    env.DB.prepare(
      `SELECT model_version AS version, scored_ms / ${DAY_MS} AS day, COUNT(*) AS n FROM review_status
       WHERE model_version IN (SELECT value FROM json_each(?1)) AND decided = 0 GROUP BY model_version, day`,
    ).bind(list),
  ]);
  const keep = onFullyDecidedDays(decided.results, waiting.results);
  const rows: LabelledRows & { undecided: number; heldBack: number } = { mahalanobisSq: [], fraud: [], weight: [], flagged: [], undecided: 0, heldBack: 0 };
  decided.results.forEach((r, i) => {
    if (!keep[i]) {
      rows.heldBack++;
      return;
    }
    rows.mahalanobisSq.push(Number(r.d2));
    rows.fraud.push(r.outcome === "fraud" ? 1 : 0);
    rows.weight.push(1 / Number(r.pi));
    rows.flagged.push(r.selection === "flagged" ? 1 : 0);
  });
  for (const cell of waiting.results) rows.undecided += Number(cell.n);
  return rows;
}

/**
 * UTC day `days` before the day of `now` (0 = that day), as YYYY-MM-DD.
 *
 * @example
 * dayBefore(new Date("2026-12-07T04:00:00Z"), 6) // "2026-12-01"
 */
export function dayBefore(now: Date, days: number): string {
  return new Date(Date.UTC(now.getUTCFullYear(), now.getUTCMonth(), now.getUTCDate() - days)).toISOString().slice(0, 10);
}
