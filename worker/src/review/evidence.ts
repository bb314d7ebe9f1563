/**
 * The evidence behind one payment, recomputed from the model version that scored it: every
 * feature's standardized conditional residual (for the bar chart) and the marginal Gaussian of the
 * two most unusual single-column features (for the pair plot with equal-density ellipses).
 *
 * The marginal of (x_a, x_b) under N(μ, Σ) is N((μ_a, μ_b), Σ restricted to {a, b}): no inversion
 * is needed, the 2×2 block is read off Σ. Σ is the artifact's covariance (maximum likelihood, ÷ m,
 * or the estimator's own scaling as recorded in the artifact).
 */
import { conditionalReasons, rawVectorFromRecord, selectSegment, transformInto } from "../../../shared-model/src";
import type { Env } from "../env";
import { modelCache, ModelLoadError, type LoadedModel } from "../scoring/model-cache";
import type { PairEvidence, WireReason } from "../contract";
import { toWireReasons } from "../scoring/wire-reasons";

/**
 * The verified, compiled model of a version, from the isolate's model cache (shared with scoring
 * and the model page) or KV.
 * @throws {ModelLoadError} when the version is missing or does not verify.
 */
export function modelFor(env: Pick<Env, "MODELS">, version: string): Promise<LoadedModel> {
  return modelCache.model(env, version);
}

export interface Evidence {
  /** In their wire form: an unbounded expected range is null, as in the stored reasons. */
  residuals: WireReason[] | null;
  pair: PairEvidence | null;
  /** Plain-words reason when residuals or pair are missing. */
  gap: string | null;
}

/**
 * Recomputes the evidence for a stored payment.
 * @param features the raw features object as received by the scorer
 * @param segment the segment key that scored it (`*` = pooled)
 * @example await evidenceFor(env, "m20261201-1f3a9c2e", "web", { amount: 1240, items: 1 })
 */
export async function evidenceFor(env: Pick<Env, "MODELS">, version: string, segment: string, features: Record<string, unknown>): Promise<Evidence> {
  let model: LoadedModel;
  try {
    model = await modelFor(env, version);
  } catch (error) {
    if (error instanceof ModelLoadError) {
      const why = error.code === "artifact-missing" ? "is no longer stored" : "could not be read or verified";
      return { residuals: null, pair: null, gap: `Model ${version} ${why}, so only the reasons saved at scoring time are shown.` };
    }
    throw error;
  }
  const { compiled } = model;
  const raw = rawVectorFromRecord(compiled, features);
  if ("errors" in raw) {
    const first = raw.errors[0];
    return { residuals: null, pair: null, gap: `The stored features do not fit model ${version} (${first.field} ${first.rule}).` };
  }
  const seg = selectSegment(compiled, segment);
  const x = new Float64Array(compiled.n);
  transformInto(compiled.features, raw.values, x);
  const residuals = conditionalReasons(seg, compiled.features, raw.values, x, compiled.features.length);

  // The two most unusual features that are one column each (a cyclic hour is a circle, not an axis).
  const axes = residuals
    .map((r) => compiled.features.findIndex((f) => f.name === r.feature))
    .filter((i) => i >= 0 && compiled.features[i].columns.length === 1)
    .slice(0, 2);
  if (axes.length < 2) {
    return { residuals: toWireReasons(residuals), pair: null, gap: "The model has fewer than two single-column features, so there is no pair to plot." };
  }
  const [a, b] = axes.map((i) => compiled.columns.indexOf(compiled.features[i].columns[0]));
  const n = compiled.n;
  const pair: PairEvidence = {
    axes: [
      { feature: compiled.features[axes[0]], column: a },
      { feature: compiled.features[axes[1]], column: b },
    ],
    segment: seg.key,
    mean: [seg.mean[a], seg.mean[b]],
    covariance: [
      [seg.covariance[a * n + a], seg.covariance[a * n + b]],
      [seg.covariance[b * n + a], seg.covariance[b * n + b]],
    ],
    point: [x[a], x[b]],
    rawPoint: [raw.values[axes[0]], raw.values[axes[1]]],
  };
  return { residuals: toWireReasons(residuals), pair, gap: null };
}
