/**
 * The models one fit produces: the pooled `*` model and one per segment value with enough rows.
 * A segment that cannot be fitted falls back to the pooled model, with the reason kept for the
 * artifact and a warning for the report.
 */
import type { ArtifactSegment } from "./artifact";
import { diagnoseRowCount } from "./diagnostics";
import type { CovarianceEstimate, FourthMomentAccumulator } from "./estimators";
import { FitInputError, type FitRow } from "./fit-types";
import { MomentAccumulator } from "./moments";
import type { CovarianceShape, Diagnostic, EstimatorName } from "./types";

/** One model being fitted: the pooled `*` or a segment value with enough rows. */
export interface ModelSlot {
  key: string;
  rows: number;
  moments: MomentAccumulator;
  /** Transformed rows (robust only), m×n row-major. */
  data: Float64Array | null;
  filled: number;
  fourth: FourthMomentAccumulator | null;
  estimate: CovarianceEstimate | null;
  conditionNumber: number;
  segment: ArtifactSegment | null;
  precision: Float64Array | null;
  mean: Float64Array | null;
}

/**
 * The segment a row belongs to; an empty value counts as none (pooled only).
 * @example segmentKey({ values, segment: "" }, "channel") // null
 */
export function segmentKey(row: FitRow, segmentBy: string | null): string | null {
  return segmentBy === null || row.segment === null || row.segment === "" ? null : row.segment;
}

/** How the slots are planned from the row counts of the first pass. */
export interface SlotPlan {
  rowsUsed: number;
  segmentCounts: Map<string, number>;
  /** Model columns. */
  n: number;
  shape: CovarianceShape;
  estimator: EstimatorName;
  minSegmentRows: number;
  segmentBy: string | null;
  /**
   * Rows the robust estimator holds per model; default the model's own rows. Smaller when the
   * robust fit runs on a sample (moments computed elsewhere).
   */
  robustRows?: (key: string, rows: number) => number;
}

/**
 * The pooled model and the fitted segments, with the values that fall back to the pooled model
 * and why. Warnings (row counts, demotions) collect in `warnings` in the order they arose.
 */
export class ModelSlots {
  /** Pooled first, then fitted segments in sorted key order. */
  readonly all: ModelSlot[];
  /** Segment values scored by the pooled model, with the reason. */
  readonly fallbacks = new Map<string, string>();
  readonly warnings: Diagnostic[];
  private readonly byKey: Map<string, ModelSlot>;

  /**
   * Plans the slots: the pooled model, and every segment value with at least `minSegmentRows`
   * rows that passes its own row-count check.
   * @param pooledWarnings the pooled row-count diagnostics (warnings only; errors refuse earlier)
   */
  constructor(
    private readonly plan: SlotPlan,
    pooledWarnings: Diagnostic[],
  ) {
    this.warnings = [...pooledWarnings];
    const { n, shape, minSegmentRows } = plan;
    this.all = [this.newSlot("*", plan.rowsUsed)];
    for (const key of [...plan.segmentCounts.keys()].sort()) {
      const rows = plan.segmentCounts.get(key)!;
      if (rows < minSegmentRows) {
        this.fallbacks.set(key, `${rows} rows < ${minSegmentRows} required`);
        continue;
      }
      const rowDiagnostics = diagnoseRowCount(rows, n, shape);
      const error = rowDiagnostics.find((d) => d.severity === "error");
      if (error !== undefined) {
        this.fallbacks.set(key, error.message);
        continue;
      }
      this.all.push(this.newSlot(key, rows));
    }
    this.byKey = new Map(this.all.map((s) => [s.key, s]));
  }

  /** The pooled `*` model. */
  get pooled(): ModelSlot {
    return this.all[0];
  }

  /** Slots still fitted (not fallen back). */
  live(): ModelSlot[] {
    return this.all.filter((s) => !this.fallbacks.has(s.key));
  }

  /** Sends a segment back to the pooled model, with a warning that names the reason. */
  demote(slot: ModelSlot, reason: string): void {
    this.fallbacks.set(slot.key, reason);
    this.warnings.push({
      code: "segment-fallback",
      severity: "warning",
      message: `segment '${slot.key}' (${slot.rows} rows) is scored by the pooled model: ${reason}`,
      remedy: "check the segment's data, or raise --min-segment-rows to pool small segments",
    });
    slot.data = null;
    slot.fourth = null;
  }

  /**
   * The models a row feeds while accumulating: always the pooled one, plus its own segment when
   * that is fitted.
   * @throws FitInputError when a later pass yields more rows than the first
   */
  feeding(row: FitRow, rowNumber: number): ModelSlot[] {
    if (rowNumber > this.plan.rowsUsed) {
      throw new FitInputError("source", `a later pass yielded more rows than the first pass (${this.plan.rowsUsed}); every pass must yield the same rows`);
    }
    const key = segmentKey(row, this.plan.segmentBy);
    const pooled = this.pooled;
    if (key === null) return [pooled];
    const own = this.byKey.get(key);
    return own === undefined || own === pooled ? [pooled] : [pooled, own];
  }

  /** The model that scores a row: its own segment's when fitted and live, else the pooled one. */
  scoring(row: FitRow): ModelSlot {
    const key = segmentKey(row, this.plan.segmentBy);
    const own = key === null ? undefined : this.byKey.get(key);
    return own !== undefined && !this.fallbacks.has(own.key) ? own : this.pooled;
  }

  private newSlot(key: string, rows: number): ModelSlot {
    const { n, estimator } = this.plan;
    const held = this.plan.robustRows?.(key, rows) ?? rows;
    return {
      key,
      rows,
      moments: new MomentAccumulator(n),
      // Robust holds the data: m·n doubles per model (FAST-MCD works on the rows themselves).
      data: estimator === "robust" ? new Float64Array(held * n) : null,
      filled: 0,
      fourth: null,
      estimate: null,
      conditionNumber: Number.NaN,
      segment: null,
      precision: null,
      mean: null,
    };
  }
}
