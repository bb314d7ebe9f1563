/**
 * Scoring: turns a verified artifact into Float64Arrays once, then scores payments with a kernel
 * that allocates nothing. log p(x) = −½ (n ln 2π + ln|Σ| + d²) with d² = (x−μ)ᵀ Λ (x−μ), Λ = Σ⁻¹;
 * P(χ²ₙ > d²) is the calibrated tail probability (Mahalanobis 1936; the χ² law of d² under the
 * Gaussian, e.g. Johnson & Wichern, Applied Multivariate Statistical Analysis, §4.4), or for a
 * small segment the predictive law of a new point its cutoff was chosen by (`tail-law.ts`).
 */
import { InputError } from "./input-error";
import type { ModelArtifact } from "./artifact";
import { checkRawValue, transformInto } from "./features";
import { fromRows } from "./linalg";
import { logDensityAt } from "./log-density";
import { kernelScratch, mahalanobisSqPacked, packQuadraticForm, type PackedQuadraticForm } from "./quadratic-form";
import { conditionalReasons } from "./reasons";
import { tailFigures } from "./tail-law";
import type { FittedFeature, Reason, ScoreResult, SegmentModel } from "./types";

/** A model ready to score: every segment's mean and precision as Float64Arrays, built once. */
export interface CompiledModel {
  artifact: ModelArtifact;
  version: string;
  features: FittedFeature[];
  columns: string[];
  n: number;
  segmentBy: string | null;
  /** Every fitted segment by key, `*` included. Fallback segments are not here: they score as `*`. */
  segments: Map<string, SegmentModel>;
  pooled: SegmentModel;
  cutoffMahalanobisSq: number;
  /** P(χ²ₙ > cutoff), as stored in the artifact. */
  cutoffTailProbability: number;
  /** The cutoff's tail probability under each segment's own law, by segment key. */
  cutoffTailBySegment: Map<string, number>;
}

/**
 * Input error while scoring one payment, naming the field (`features.amount`) and the rule;
 * the worker maps it to a 4xx answer.
 */
export class ScoreInputError extends InputError {}

/**
 * Compiles a verified artifact (from {@link parseArtifact}) for scoring: converts each segment's
 * mean, covariance and precision to row-major Float64Arrays and precomputes the log-normaliser
 * −½ (n ln 2π + ln|Σ|). Nothing is re-parsed or re-inverted per payment.
 * @example const scorer = new Scorer(compileModel(await parseArtifact(json)));
 */
export function compileModel(artifact: ModelArtifact): CompiledModel {
  const n = artifact.columns.length;
  const segments = new Map<string, SegmentModel>();
  for (const key of Object.keys(artifact.segments)) {
    const s = artifact.segments[key];
    segments.set(key, {
      key,
      rows: s.rows,
      n,
      mean: Float64Array.from(s.mean),
      covariance: fromRows(s.covariance),
      precision: fromRows(s.precision),
      logDet: s.logDet,
      logNormalizer: logDensityAt(n, s.logDet, 0),
      ...(s.tailLaw === undefined ? {} : { tailLaw: s.tailLaw }),
    });
  }
  const cutoffTailBySegment = new Map<string, number>();
  for (const [key, seg] of segments) cutoffTailBySegment.set(key, tailFigures(artifact.cutoff.mahalanobisSq, seg).tailProbability);
  const pooled = segments.get("*");
  if (pooled === undefined) throw new RangeError('segments["*"]: the pooled segment is required (parse the artifact with parseArtifact first)');
  return {
    artifact,
    version: artifact.version,
    features: artifact.features.map((f) => ({ ...f, columns: [...f.columns] })),
    columns: [...artifact.columns],
    n,
    segmentBy: artifact.segmentBy,
    segments,
    pooled,
    cutoffMahalanobisSq: artifact.cutoff.mahalanobisSq,
    cutoffTailProbability: artifact.cutoff.tailProbability,
    cutoffTailBySegment,
  };
}

/**
 * The segment model that scores a payment: the fitted segment for `segment`, or the pooled `*`
 * model when `segment` is null, undefined, unknown or one of the small segments that fell back.
 * @example selectSegment(model, "web").key // "web", or "*" when web fell back
 */
export function selectSegment(model: CompiledModel, segment?: string | null): SegmentModel {
  if (segment === null || segment === undefined) return model.pooled;
  return model.segments.get(segment) ?? model.pooled;
}

/**
 * Squared Mahalanobis distance d² = (x−μ)ᵀ Λ (x−μ), the hot kernel. Fills `diff` with x − μ and
 * uses the symmetry of Λ: d² = Σ_i diff_i (Λ_ii diff_i + 2 Σ_{j>i} Λ_ij diff_j), half the
 * multiply-adds of the full double loop. Allocates nothing; NaN in x propagates to the result.
 *
 * Rows are taken four at a time (register blocking): each diff_j loaded in the inner loop feeds
 * four independent multiply-adds, which cuts loads and bounds checks per multiply-add and gives
 * the CPU four accumulation chains to overlap. The 4×4 diagonal block of each group is summed
 * explicitly. This kernel reads Λ as it is (the fit uses it); the Scorer uses the same sums on a
 * layout prepared once per model, `mahalanobisSqPacked` in quadratic-form.ts, which is faster.
 * @param precision Λ, n×n row-major, symmetric (only the upper triangle and diagonal are read)
 * @param diff scratch of length ≥ n, overwritten
 * @example mahalanobisSq(Float64Array.of(1, 0, 0, 4), Float64Array.of(0, 0), [1, 1], 2, new Float64Array(2)) // 5
 */
export function mahalanobisSq(precision: Float64Array, mean: Float64Array, x: ArrayLike<number>, n: number, diff: Float64Array): number {
  for (let i = 0; i < n; i++) diff[i] = x[i] - mean[i];
  let total = 0;
  let i = 0;
  for (; i + 3 < n; i += 4) {
    const r0 = i * n;
    const r1 = r0 + n;
    const r2 = r1 + n;
    const r3 = r2 + n;
    const d0 = diff[i];
    const d1 = diff[i + 1];
    const d2 = diff[i + 2];
    const d3 = diff[i + 3];
    const block =
      d0 * (precision[r0 + i] * d0 + 2 * (precision[r0 + i + 1] * d1 + precision[r0 + i + 2] * d2 + precision[r0 + i + 3] * d3)) +
      d1 * (precision[r1 + i + 1] * d1 + 2 * (precision[r1 + i + 2] * d2 + precision[r1 + i + 3] * d3)) +
      d2 * (precision[r2 + i + 2] * d2 + 2 * precision[r2 + i + 3] * d3) +
      d3 * precision[r3 + i + 3] * d3;
    let a0 = 0;
    let a1 = 0;
    let a2 = 0;
    let a3 = 0;
    for (let j = i + 4; j < n; j++) {
      const dj = diff[j];
      a0 += precision[r0 + j] * dj;
      a1 += precision[r1 + j] * dj;
      a2 += precision[r2 + j] * dj;
      a3 += precision[r3 + j] * dj;
    }
    total += block + 2 * (d0 * a0 + d1 * a1 + d2 * a2 + d3 * a3);
  }
  // The last n mod 4 rows, one at a time.
  for (; i < n; i++) {
    const row = i * n;
    const di = diff[i];
    let off = 0;
    for (let j = i + 1; j < n; j++) off += precision[row + j] * diff[j];
    total += di * (precision[row + i] * di + 2 * off);
  }
  // Λ is positive definite, so d² ≥ 0; only rounding next to x = μ can dip below zero.
  return total < 0 ? 0 : total;
}

/**
 * d² for a diagonal model in O(n): Σ_i Λ_ii (x_i − μ_i)². Same contract as {@link mahalanobisSq}
 * (reads only the diagonal of Λ, fills `diff`).
 * @example mahalanobisSqDiagonal(Float64Array.of(1, 0, 0, 4), Float64Array.of(0, 0), [1, 1], 2, new Float64Array(2)) // 5
 */
export function mahalanobisSqDiagonal(precision: Float64Array, mean: Float64Array, x: ArrayLike<number>, n: number, diff: Float64Array): number {
  let total = 0;
  for (let i = 0; i < n; i++) {
    const d = x[i] - mean[i];
    diff[i] = d;
    total += precision[i * n + i] * d * d;
  }
  return total;
}

/**
 * Scores payments against a compiled model. Lays out every segment's precision for the packed
 * kernel once (quadratic-form.ts) and holds scratch buffers (transformed vector x and x − μ), so
 * `score` allocates only its result object. Not re-entrant: use one Scorer per concurrent caller
 * (JavaScript's single thread makes one per worker isolate enough).
 */
export class Scorer {
  readonly model: CompiledModel;
  private readonly x: Float64Array;
  private readonly diff: Float64Array;
  private readonly scratch: number[];
  private readonly diagonal: boolean;
  private readonly forms = new Map<SegmentModel, PackedQuadraticForm>();

  constructor(model: CompiledModel) {
    this.model = model;
    this.x = new Float64Array(model.n);
    this.diff = new Float64Array(model.n);
    this.scratch = kernelScratch(model.n);
    // A diagonal model has exact zeros off the diagonal, so the O(n) kernel gives the same d².
    this.diagonal = model.artifact.covarianceShape === "diagonal";
    if (!this.diagonal) for (const seg of model.segments.values()) this.forms.set(seg, packQuadraticForm(seg.precision, seg.mean, seg.n));
  }

  /** d² of the transformed vector x (a Float64Array, to keep the kernel monomorphic) under seg. */
  private distanceSq(seg: SegmentModel, x: Float64Array): number {
    if (this.diagonal) return mahalanobisSqDiagonal(seg.precision, seg.mean, x, seg.n, this.diff);
    // A segment model from elsewhere (not one of this model's) is laid out for this call only.
    const form = this.forms.get(seg) ?? packQuadraticForm(seg.precision, seg.mean, seg.n);
    return mahalanobisSqPacked(form, x, this.scratch);
  }

  /**
   * Scores one payment from its raw feature values (in the model's feature order, raw units).
   * @throws ScoreInputError when the vector has the wrong length or a value is outside its
   *   transform's domain (e.g. amount ≤ 0 under `log`); never returns a NaN score.
   * @example scorer.score([42.5, 3, 14], "web") // { mahalanobisSq: 2.1, tailProbability: 0.55, flagged: false, … }
   */
  score(raw: ArrayLike<number>, segment?: string | null): ScoreResult {
    this.checkRaw(raw);
    const seg = selectSegment(this.model, segment);
    transformInto(this.model.features, raw, this.x);
    const d2 = this.distanceSq(seg, this.x);
    if (!Number.isFinite(d2)) {
      throw new ScoreInputError("features", "produce a non-finite squared distance (values too large for the model)");
    }
    return this.result(d2, seg);
  }

  /**
   * Scores an already transformed vector (model columns) under a given segment model.
   * @throws ScoreInputError when x has the wrong length or a non-finite entry
   */
  scoreTransformed(x: ArrayLike<number>, seg: SegmentModel): ScoreResult {
    if (seg.n !== this.model.n) {
      throw new ScoreInputError("segment", `must have this model's ${this.model.n} columns. Actual: ${seg.n}`);
    }
    if (x.length !== seg.n) {
      throw new ScoreInputError("columns", `must have ${seg.n} model-column values. Actual: ${x.length}`);
    }
    const xs = this.x;
    for (let i = 0; i < seg.n; i++) xs[i] = x[i];
    const d2 = this.distanceSq(seg, xs);
    if (!Number.isFinite(d2)) {
      for (let i = 0; i < seg.n; i++) {
        if (!Number.isFinite(x[i])) throw new ScoreInputError(`columns.${this.model.columns[i]}`, `must be finite. Actual: ${x[i]}`);
      }
      throw new ScoreInputError("columns", "produce a non-finite squared distance (values too large)");
    }
    return this.result(d2, seg);
  }

  /**
   * Why a payment scored as it did: the `top` features with the largest standardized conditional
   * residuals, each with the expected centre and 95 % range given the other features, in raw units.
   * @throws ScoreInputError on a wrong-length vector or an out-of-domain value
   */
  explain(raw: ArrayLike<number>, segment?: string | null, top = 3): Reason[] {
    this.checkRaw(raw);
    const features = this.model.features;
    const seg = selectSegment(this.model, segment);
    const x = new Float64Array(this.model.n);
    transformInto(features, raw, x);
    return conditionalReasons(seg, features, raw, x, top);
  }

  /**
   * Length and domain of a raw vector. The domain checks are n comparisons (no allocation unless one
   * fails) against an O(n²) kernel; without them an hour of 30 would score as 6 and a negative
   * amount as NaN.
   * @throws ScoreInputError naming the first offending feature
   */
  private checkRaw(raw: ArrayLike<number>): void {
    const features = this.model.features;
    if (raw.length !== features.length) {
      throw new ScoreInputError("features", `must have ${features.length} values in feature order. Actual: ${raw.length}`);
    }
    for (let i = 0; i < features.length; i++) {
      const rule = ruleFor(features[i], raw[i]);
      if (rule !== null) throw new ScoreInputError(`features.${features[i].name}`, rule);
    }
  }

  private result(d2: number, seg: SegmentModel): ScoreResult {
    const tail = tailFigures(d2, seg);
    return {
      logDensity: seg.logNormalizer - 0.5 * d2,
      mahalanobisSq: d2,
      tailProbability: tail.tailProbability,
      log10TailProbability: tail.log10TailProbability,
      flagged: d2 > this.model.cutoffMahalanobisSq,
      segment: seg.key,
    };
  }
}

function ruleFor(feature: FittedFeature, value: unknown): string | null {
  if (typeof value !== "number") return `must be a number. Actual: ${describeValue(value)}`;
  if (!Number.isFinite(value)) return `must be a finite number. Actual: ${value}`;
  return checkRawValue(feature, value);
}

/** Most unknown-key errors reported for one record; a flood of keys should not flood the answer. */
const MAX_UNKNOWN_KEYS = 20;

/**
 * Builds the raw vector (feature order) from a record keyed by feature name, e.g. a request
 * body's `features` object. Reports every problem at once: a missing feature, an unknown key, a
 * value that is not a number (the string "12" is refused: type confusion is an error, not a
 * convenience), a non-finite number, or a value outside the transform's domain. Reads only own
 * keys, so `__proto__` or `constructor` in the input are ordinary unknown keys.
 * @example rawVectorFromRecord(model, { amount: 42.5, items: 3 }) // { values: Float64Array [42.5, 3] }
 * @example rawVectorFromRecord(model, { amount: "12" }) // { errors: [{ field: "features.amount", rule: 'must be a number. Actual: string "12"' }, …] }
 */
export function rawVectorFromRecord(model: CompiledModel, record: Record<string, unknown>): { values: Float64Array } | { errors: { field: string; rule: string }[] } {
  if (typeof record !== "object" || record === null || Array.isArray(record)) {
    return { errors: [{ field: "features", rule: `must be an object keyed by feature name. Actual: ${describeValue(record)}` }] };
  }
  const errors: { field: string; rule: string }[] = [];
  const values = new Float64Array(model.features.length);
  const known = new Set<string>();
  model.features.forEach((feature, i) => {
    known.add(feature.name);
    const field = `features.${feature.name}`;
    if (!Object.hasOwn(record, feature.name)) {
      errors.push({ field, rule: `is required (a number in raw units, ${describeTransform(feature)})` });
      return;
    }
    const value = record[feature.name];
    const rule = ruleFor(feature, value);
    if (rule !== null) {
      errors.push({ field, rule });
      return;
    }
    values[i] = value as number;
  });
  const unknown = Object.keys(record).filter((k) => !known.has(k));
  const expected = model.features.map((f) => f.name).join(", ");
  for (const key of unknown.slice(0, MAX_UNKNOWN_KEYS)) {
    errors.push({ field: `features.${truncate(key)}`, rule: `is not a feature of model ${model.version}; expected only: ${expected}` });
  }
  if (unknown.length > MAX_UNKNOWN_KEYS) {
    errors.push({ field: "features", rule: `has ${unknown.length - MAX_UNKNOWN_KEYS} more unknown keys (not listed)` });
  }
  return errors.length > 0 ? { errors } : { values };
}

function describeTransform(feature: FittedFeature): string {
  return feature.transform === "none" ? "no transform" : `${feature.transform} transform`;
}

function describeValue(value: unknown): string {
  if (value === null) return "null";
  if (value === undefined) return "undefined";
  if (Array.isArray(value)) return "an array";
  switch (typeof value) {
    case "string":
      return `string ${JSON.stringify(truncate(value))}`;
    case "number":
    case "boolean":
      return `${typeof value} ${String(value)}`;
    case "object":
      return "an object";
    default:
      return `a ${typeof value}`;
  }
}

function truncate(s: string): string {
  return s.length > 40 ? `${s.slice(0, 40)}…` : s;
}
