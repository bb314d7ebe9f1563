/**
 * Validation and scoring of one payment against the live model (and the shadow, if any). Pure
 * apart from the clock: the answer depends only on the model version and the request, which is
 * what makes a repeated request safe to answer from memory.
 */
import { rawVectorFromRecord, ScoreInputError, type ScoreResult } from "../../../shared-model/src";
import type { Problem } from "../env";
import { fieldPath, problemsFromZod } from "../problems";
import { scoreRequestSchema, type ScoreAnswer } from "../contract/scoring";
import type { ReviewMessage, ShadowMessage } from "../storage/messages";
import { isAudited } from "./audit-sample";
import { counters } from "./counters";
import { checkPaymentForm, derivedVector, type PaymentClock, type PaymentRequest, type PendingPayment } from "../history/payment-form";
import type { LoadedModel, ModelSnapshot } from "./model-cache";
import { toWireReasons } from "./wire-reasons";

/** A request that passed every check, with its raw vector in the live model's feature order. */
export interface ValidPayment {
  transactionId: string;
  /** The features object as received, or as derived in the payment form (numbers keyed by feature name). */
  features: Record<string, number>;
  segment: string | null;
  accountRef: string | null;
  /** Raw values in the live model's feature order. */
  raw: Float64Array;
  /** True when the features were derived from a payment record (the answer then carries `derived`). */
  derived: boolean;
}

/** Outcome of a check: the valid payment, or every problem found. */
export type Checked<T> = { ok: true; value: T } | { ok: false; problems: Problem[] };

/** Reasons returned per payment. */
export const REASONS_PER_ANSWER = 3;

/**
 * Checks a request body against the schema and the live model, reporting every problem at once,
 * each with its field path under `prefix` (`""` or `payments[3].`). The features form is checked
 * completely (unknown keys, missing or non-numeric features, values outside a transform's domain);
 * the payment form up to what needs no history ({@link checkPaymentForm}): its features are
 * derived later, at the account's history.
 *
 * @example
 * validatePayment({ transactionId: "pay-1", features: { amount: "12" } }, model, "", clock)
 * // → { ok: false, problems: [{ field: "features.amount", rule: 'must be a number. Actual: string "12"' }, …] }
 */
export function validatePayment(input: unknown, model: LoadedModel, prefix: string, clock: PaymentClock): Checked<ValidPayment | PendingPayment> {
  const parsed = scoreRequestSchema.safeParse(input);
  const problems: Problem[] = parsed.success ? [] : problemsFromZod(parsed.error, input, prefix, scoreRequestSchema);
  const sent = (key: string) => isRecord(input) && Object.hasOwn(input, key);
  if (sent("features") && sent("payment")) {
    problems.push({ field: fieldPath(prefix, ["payment"]), rule: "cannot be sent together with features: send ready features or a payment record, not both" });
  } else if (!sent("features") && !sent("payment") && isRecord(input)) {
    problems.push({ field: fieldPath(prefix, ["features"]), rule: "is required: send features (ready values) or payment (a payment record the model derives them from)" });
  }
  if (sent("payment")) {
    if (!parsed.success || problems.length > 0) return { ok: false, problems };
    return checkPaymentForm(parsed.data as PaymentRequest, model, prefix, clock);
  }
  const features = sent("features") ? (input as Record<string, unknown>).features : undefined;
  let raw: Float64Array | null = null;
  if (isRecord(features)) {
    // The object as received, not zod's copy: rawVectorFromRecord reads own keys only, so
    // `__proto__` and friends are reported as unknown features rather than swallowed.
    const vector = rawVectorFromRecord(model.compiled, features);
    if ("errors" in vector) for (const e of vector.errors) problems.push({ field: prefixed(prefix, e.field), rule: e.rule });
    else raw = vector.values;
  }
  if (!parsed.success || raw === null || problems.length > 0) return { ok: false, problems };
  const body = parsed.data;
  return {
    ok: true,
    value: {
      transactionId: body.transactionId,
      features: body.features as Record<string, number>,
      segment: body.segment ?? null,
      accountRef: body.accountRef ?? null,
      raw,
      derived: false,
    },
  };
}

/**
 * Completes a payment-form request with the features its account's history gave.
 *
 * @param raw derived raw values in the live model's feature order.
 */
export function completePayment(pending: PendingPayment, model: LoadedModel, raw: readonly number[], prefix: string): Checked<ValidPayment> {
  const vector = derivedVector(model, raw, prefix);
  if (!vector.ok) return vector;
  const { transactionId, segment, accountRef } = pending;
  return { ok: true, value: { transactionId, features: vector.features, segment, accountRef, raw: vector.values, derived: true } };
}

/** Whether a checked request still waits for its history. */
export function isPending(payment: ValidPayment | PendingPayment): payment is PendingPayment {
  return "record" in payment;
}

/** A scored payment: the answer for the flow, and what goes to the queue. */
export interface ScoredPayment {
  answer: ScoreAnswer;
  /** Present when flagged or drawn into the audit sample. */
  review: ReviewMessage | null;
  /** Present when a shadow model is set and could score the payment. */
  shadow: ShadowMessage | null;
}

/**
 * Scores a valid payment: decision, distances, cutoff, reasons, audit draw, and the messages.
 *
 * @param auditPosition the payment's position in [0, 1) ({@link auditPosition}).
 * @param auditRate inclusion probability of passing payments.
 * @param scoredAt ISO-8601 time stamp stored with the review item (not part of the answer).
 * @example
 * const scored = scorePayment(snapshot, payment, await auditPosition(payment.transactionId), 0.002, new Date().toISOString());
 */
export function scorePayment(snapshot: ModelSnapshot, payment: ValidPayment, auditPosition: number, auditRate: number, scoredAt: string, prefix = ""): Checked<ScoredPayment> {
  const { live } = snapshot;
  let result: ScoreResult;
  let reasons: ReturnType<typeof toWireReasons>;
  try {
    result = live.scorer.score(payment.raw, payment.segment);
    reasons = toWireReasons(live.scorer.explain(payment.raw, payment.segment, REASONS_PER_ANSWER));
  } catch (error) {
    if (error instanceof ScoreInputError) return { ok: false, problems: [{ field: prefixed(prefix, error.field), rule: error.rule }] };
    throw error;
  }
  const artifact = live.artifact;
  const segmentModel = live.compiled.segments.get(result.segment) ?? live.compiled.pooled;
  const cutoffLogDensity = artifact.cutoff.logDensity[result.segment] ?? segmentModel.logNormalizer - 0.5 * live.compiled.cutoffMahalanobisSq;
  const audited = !result.flagged && isAudited(auditPosition, auditRate);
  const answer: ScoreAnswer = {
    transactionId: payment.transactionId,
    decision: result.flagged ? "review" : "pass",
    logDensity: result.logDensity,
    mahalanobisSq: result.mahalanobisSq,
    tailProbability: result.tailProbability,
    log10TailProbability: result.log10TailProbability,
    cutoff: {
      mahalanobisSq: live.compiled.cutoffMahalanobisSq,
      tailProbability: live.compiled.cutoffTailBySegment.get(result.segment) ?? live.compiled.cutoffTailProbability,
      logDensity: cutoffLogDensity,
    },
    modelVersion: live.version,
    segment: result.segment,
    reasons,
    auditSample: audited,
    ...(payment.derived ? { derived: payment.features } : {}),
  };
  const review: ReviewMessage | null =
    result.flagged || audited
      ? {
          kind: "review",
          transactionId: payment.transactionId,
          modelVersion: live.version,
          segment: result.segment,
          accountRef: payment.accountRef,
          features: payment.features,
          logDensity: result.logDensity,
          mahalanobisSq: result.mahalanobisSq,
          tailProbability: result.tailProbability,
          log10TailProbability: result.log10TailProbability,
          cutoffMahalanobisSq: live.compiled.cutoffMahalanobisSq,
          reasons,
          selection: result.flagged ? "flagged" : "audit",
          inclusionProbability: result.flagged ? 1 : auditRate,
          scoredAt,
        }
      : null;
  return { ok: true, value: { answer, review, shadow: shadowComparison(snapshot, payment, result, scoredAt) } };
}

/** Scores the payment with the shadow model; null (and counted) when the shadow cannot score it. */
function shadowComparison(
  snapshot: ModelSnapshot,
  payment: ValidPayment,
  live: { flagged: boolean; mahalanobisSq: number; tailProbability: number; segment: string },
  scoredAt: string,
): ShadowMessage | null {
  const shadow = snapshot.shadow;
  if (shadow === null) return null;
  // The shadow may use a subset of the live features, or other transforms: give it only its own
  // features, and skip the comparison when one is missing or outside its domain.
  const record: Record<string, number> = {};
  for (const feature of shadow.compiled.features) {
    if (!Object.hasOwn(payment.features, feature.name)) {
      counters.shadowSkipped++;
      return null;
    }
    record[feature.name] = payment.features[feature.name];
  }
  const vector = rawVectorFromRecord(shadow.compiled, record);
  if ("errors" in vector) {
    counters.shadowSkipped++;
    return null;
  }
  let result: ScoreResult;
  try {
    result = shadow.scorer.score(vector.values, payment.segment);
  } catch {
    counters.shadowSkipped++;
    return null;
  }
  return {
    kind: "shadow",
    transactionId: payment.transactionId,
    liveVersion: snapshot.live.version,
    shadowVersion: shadow.version,
    liveSegment: live.segment,
    shadowSegment: result.segment,
    liveFlagged: live.flagged,
    shadowFlagged: result.flagged,
    liveMahalanobisSq: live.mahalanobisSq,
    shadowMahalanobisSq: result.mahalanobisSq,
    liveTailProbability: live.tailProbability,
    shadowTailProbability: result.tailProbability,
    scoredAt,
  };
}

function isRecord(value: unknown): value is Record<string, unknown> {
  return typeof value === "object" && value !== null && !Array.isArray(value);
}

/** Puts a core field (`features.amount`) under the request's prefix (`payments[3].`). */
function prefixed(prefix: string, field: string): string {
  return prefix === "" ? field : `${fieldPath(prefix, [])}.${field}`;
}
