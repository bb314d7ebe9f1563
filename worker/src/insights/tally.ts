/**
 * Per-isolate traffic counts for drift and flag-rate checks, kept in memory and handed to the
 * queue in aggregated flushes (`count-scored.ts`), so the scoring path never writes to D1.
 *
 * What one payment costs: the model's column transform into a reused buffer and one binary search
 * over 9 decile edges per column and for d² — O(n log 10) next to the O(n²) scoring kernel.
 */
import { bucketIndex, transformInto, type ModelArtifact } from "../../../shared-model/src";
import type { CountsMessage } from "./counts-message";
import { MAX_BUCKET_ENTRIES } from "./counts-message";

/** Name of the score's row in the count tables. */
export const SCORE_ROW = "mahalanobisSq";

/** The slice of a loaded model the tally needs. */
export interface TallyModel {
  version: string;
  artifact: Pick<ModelArtifact, "columns" | "features" | "reference">;
}

/** Counts of one segment of one (version, day). */
interface SegmentCounts {
  scored: number;
  flagged: number;
  /** Per model column (artifact order), one count per bucket; then the score's buckets. */
  columns: number[][];
  score: number[];
}

/** Counts of one model version on one UTC day. */
interface Group {
  version: string;
  day: string;
  columnNames: string[];
  bucketsPerColumn: number[];
  scoreBuckets: number;
  segments: Map<string, SegmentCounts>;
}

/**
 * Accumulates counts per (model version, UTC day, segment) and drains them as queue messages.
 *
 * @example
 * const tally = new TrafficTally();
 * tally.record(live, raw, { segment: "web", mahalanobisSq: 4.2, flagged: false }, "2026-12-01T09:30:00Z");
 * const messages = tally.drain(() => crypto.randomUUID());
 */
export class TrafficTally {
  private readonly groups = new Map<string, Group>();
  private readonly buffers = new Map<string, Float64Array>();
  private pending = 0;
  private oldestMs: number | null = null;

  /** Payments counted since the last drain. */
  get payments(): number {
    return this.pending;
  }

  /**
   * Counts one scored payment.
   * @param raw raw feature values in the model's feature order (already validated by scoring)
   * @param scoredAt ISO-8601 time; its UTC day keys the counts
   * @param nowMs clock for the age-based flush (default now)
   */
  record(model: TallyModel, raw: ArrayLike<number>, result: { segment: string; mahalanobisSq: number; flagged: boolean }, scoredAt: string, nowMs = Date.now()): void {
    const group = this.groupFor(model, scoredAt.slice(0, 10));
    let seg = group.segments.get(result.segment);
    if (!seg) {
      seg = { scored: 0, flagged: 0, columns: group.bucketsPerColumn.map((b) => new Array<number>(b).fill(0)), score: new Array<number>(group.scoreBuckets).fill(0) };
      group.segments.set(result.segment, seg);
    }
    seg.scored++;
    if (result.flagged) seg.flagged++;
    const edges = model.artifact.reference.columnEdges;
    if (edges.length === group.columnNames.length && edges.length > 0) {
      let x = this.buffers.get(model.version);
      if (!x) {
        x = new Float64Array(group.columnNames.length);
        this.buffers.set(model.version, x);
      }
      transformInto(model.artifact.features, raw, x);
      for (let j = 0; j < x.length; j++) seg.columns[j][bucketIndex(edges[j], x[j])]++;
    }
    seg.score[bucketIndex(model.artifact.reference.scoreEdges, result.mahalanobisSq)]++;
    this.pending++;
    this.oldestMs ??= nowMs;
  }

  /**
   * Whether a flush is due: `everyPayments` counted, or the oldest count older than `afterMs`.
   * @example tally.due(Date.now(), 500, 30_000)
   */
  due(nowMs: number, everyPayments: number, afterMs: number): boolean {
    if (this.pending === 0) return false;
    return this.pending >= everyPayments || (this.oldestMs !== null && nowMs - this.oldestMs >= afterMs);
  }

  /**
   * Empties the tally into queue messages, one or more per (version, day): non-zero buckets only,
   * split every {@link MAX_BUCKET_ENTRIES} entries; each message carries its own flush id and the
   * segment volumes travel in the first message of their group.
   */
  drain(newId: () => string): CountsMessage[] {
    const messages: CountsMessage[] = [];
    for (const group of this.groups.values()) {
      const volumes: [string, number, number][] = [];
      const buckets: [string, string, number, number][] = [];
      for (const [segment, seg] of group.segments) {
        volumes.push([segment, seg.scored, seg.flagged]);
        seg.columns.forEach((counts, j) => counts.forEach((n, b) => n > 0 && buckets.push([segment, group.columnNames[j], b, n])));
        seg.score.forEach((n, b) => n > 0 && buckets.push([segment, SCORE_ROW, b, n]));
      }
      for (let start = 0; start === 0 || start < buckets.length; start += MAX_BUCKET_ENTRIES) {
        messages.push({
          kind: "counts",
          flushId: newId(),
          modelVersion: group.version,
          day: group.day,
          volumes: start === 0 ? volumes : [],
          buckets: buckets.slice(start, start + MAX_BUCKET_ENTRIES),
        });
      }
    }
    this.groups.clear();
    this.pending = 0;
    this.oldestMs = null;
    return messages;
  }

  /**
   * Puts drained counts back (their send failed), so the next flush carries them again.
   * @param columnNamesOf the model columns of a version (from the loaded model)
   */
  restore(messages: readonly CountsMessage[], columnNamesOf: (version: string) => TallyModel | null, nowMs = Date.now()): void {
    for (const message of messages) {
      const model = columnNamesOf(message.modelVersion);
      if (!model) continue; // the model is gone from this isolate: those counts are lost (logged by the caller)
      const group = this.groupFor(model, message.day);
      const segmentOf = (key: string): SegmentCounts => {
        let seg = group.segments.get(key);
        if (!seg) {
          seg = { scored: 0, flagged: 0, columns: group.bucketsPerColumn.map((b) => new Array<number>(b).fill(0)), score: new Array<number>(group.scoreBuckets).fill(0) };
          group.segments.set(key, seg);
        }
        return seg;
      };
      for (const [segment, scored, flagged] of message.volumes) {
        const seg = segmentOf(segment);
        seg.scored += scored;
        seg.flagged += flagged;
        this.pending += scored;
      }
      for (const [segment, name, bucket, n] of message.buckets) {
        const seg = segmentOf(segment);
        const j = group.columnNames.indexOf(name);
        const target = name === SCORE_ROW ? seg.score : j >= 0 ? seg.columns[j] : null;
        if (target && bucket < target.length) target[bucket] += n;
      }
    }
    if (this.pending > 0) this.oldestMs ??= nowMs;
  }

  private groupFor(model: TallyModel, day: string): Group {
    const key = `${model.version}\u0000${day}`;
    let group = this.groups.get(key);
    if (!group) {
      const edges = model.artifact.reference.columnEdges;
      group = {
        version: model.version,
        day,
        columnNames: [...model.artifact.columns],
        bucketsPerColumn: model.artifact.columns.map((_, j) => (edges[j]?.length ?? 0) + 1),
        scoreBuckets: model.artifact.reference.scoreEdges.length + 1,
        segments: new Map(),
      };
      this.groups.set(key, group);
    }
    return group;
  }
}
