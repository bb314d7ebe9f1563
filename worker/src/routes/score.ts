/**
 * `POST /v1/score` and `POST /v1/score/batch`: the payment flow's synchronous call.
 *
 * Idempotency: the answer is a pure function of (model version, request); additionally the isolate
 * remembers recent answers by (model version, transactionId), so a repeat gets the identical
 * answer with no second hand-off, and a repeat with different content gets 409. The review store
 * keeps one row per (transaction, model version) in any case.
 */
import { Hono, type Context } from "hono";
import type { AppEnv } from "../app-env";
import { readSettings, type Problem, type Settings } from "../env";
import { countScored } from "../insights/count-scored";
import { allow, authenticate } from "../middleware/auth";
import { BODY_LIMITS, jsonBody } from "../middleware/json-body";
import { problemResponse, problemsFromZod } from "../problems";
import { AnswerCache, answerKey, contentHash } from "../scoring/answer-cache";
import { auditPosition } from "../scoring/audit-sample";
import { sendReviewItems, sendShadowComparisons } from "../scoring/handoff";
import { modelCache } from "../scoring/model-cache";
import { scorePayment, validatePayment, type ScoredPayment, type ValidPayment } from "../scoring/score-payment";
import type { ShadowMessage } from "../storage/messages";
import { batchRequestSchema, type ScoreAnswer } from "./schemas";

/** Recent answers of this isolate (module scope). */
const answers = new AnswerCache<ScoreAnswer>();

/** Scoring routes, mounted under `/v1`. */
export const scoreRoutes = new Hono<AppEnv>();

scoreRoutes.post("/score", authenticate(), allow("flow"), jsonBody(BODY_LIMITS.score), async (c) => {
  const settings = readSettings(c.env);
  const snapshot = await modelCache.snapshot(c.env, settings.modelRefreshMs);
  if (!snapshot) return noModel(c, settings);
  const checked = validatePayment(c.get("body"), snapshot.live, "");
  if (!checked.ok) return problemResponse(c, 400, "invalid-request", checked.problems);
  const payment = checked.value;
  const key = answerKey(snapshot.live.version, payment.transactionId);
  const bodyHash = await contentHash(payment.features, payment.segment, payment.accountRef);
  const remembered = answers.get(key);
  if (remembered) {
    if (remembered.bodyHash === bodyHash) return c.json(remembered.answer);
    return problemResponse(c, 409, "conflict", [conflictProblem("transactionId", payment.transactionId, snapshot.live.version)]);
  }
  const scoredAt = new Date().toISOString();
  const scored = scorePayment(snapshot, payment, await auditPosition(payment.transactionId), settings.auditSampleRate, scoredAt);
  if (!scored.ok) return problemResponse(c, 400, "invalid-request", scored.problems);
  const { answer, review, shadow } = scored.value;
  if (review) {
    const [accepted] = await sendReviewItems(c.env.FLAGS, [review]);
    if (!accepted) return handoffFailed(c, "transactionId", payment.transactionId);
  }
  if (shadow) c.executionCtx.waitUntil(sendShadowComparisons(c.env.FLAGS, [shadow]));
  answers.set(key, { bodyHash, answer });
  countScored(c.env, c.executionCtx, snapshot.live, [{ raw: payment.raw, answer, scoredAt }]);
  return c.json(answer);
});

/** One batch entry while it is being worked on. */
type BatchEntry =
  | { index: number; state: "refused"; status: 400 | 409 | 503; error: string; problems: Problem[]; retryable?: boolean }
  | { index: number; state: "remembered"; answer: ScoreAnswer }
  | { index: number; state: "valid"; payment: ValidPayment; key: string; bodyHash: string; scored?: ScoredPayment }
  | { index: number; state: "same-as"; of: number };

scoreRoutes.post("/score/batch", authenticate(), allow("flow"), jsonBody(BODY_LIMITS.batch), async (c) => {
  const settings = readSettings(c.env);
  const snapshot = await modelCache.snapshot(c.env, settings.modelRefreshMs);
  if (!snapshot) return noModel(c, settings);
  const body = c.get("body");
  const envelope = batchRequestSchema.safeParse(body);
  if (!envelope.success) return problemResponse(c, 400, "invalid-request", problemsFromZod(envelope.error, body, "", ["payments"]));
  const payments = envelope.data.payments;
  if (payments.length < 1 || payments.length > settings.maxBatch) {
    return problemResponse(c, 400, "invalid-request", [
      { field: "payments", rule: `must hold 1 to ${settings.maxBatch} payments (MAX_BATCH). Actual: ${payments.length}` },
    ]);
  }
  const version = snapshot.live.version;
  const entries: BatchEntry[] = [];
  // First occurrence of each transactionId in this batch: a later duplicate shares its outcome.
  const firstInBatch = new Map<string, { index: number; bodyHash: string }>();
  for (let index = 0; index < payments.length; index++) {
    const prefix = `payments[${index}].`;
    const checked = validatePayment(payments[index], snapshot.live, prefix);
    if (!checked.ok) {
      entries.push({ index, state: "refused", status: 400, error: "invalid-request", problems: checked.problems });
      continue;
    }
    const payment = checked.value;
    const key = answerKey(version, payment.transactionId);
    const bodyHash = await contentHash(payment.features, payment.segment, payment.accountRef);
    const conflict = conflictProblem(`${prefix}transactionId`, payment.transactionId, version);
    const earlier = firstInBatch.get(key);
    if (earlier) {
      entries.push(
        earlier.bodyHash === bodyHash
          ? { index, state: "same-as", of: earlier.index }
          : { index, state: "refused", status: 409, error: "conflict", problems: [conflict] },
      );
      continue;
    }
    firstInBatch.set(key, { index, bodyHash });
    const remembered = answers.get(key);
    if (remembered) {
      entries.push(
        remembered.bodyHash === bodyHash
          ? { index, state: "remembered", answer: remembered.answer }
          : { index, state: "refused", status: 409, error: "conflict", problems: [conflict] },
      );
      continue;
    }
    entries.push({ index, state: "valid", payment, key, bodyHash });
  }

  const scoredAt = new Date().toISOString();
  const valid = entries.filter((e): e is Extract<BatchEntry, { state: "valid" }> => e.state === "valid");
  const positions = await Promise.all(valid.map((e) => auditPosition(e.payment.transactionId)));
  valid.forEach((entry, i) => {
    const scored = scorePayment(snapshot, entry.payment, positions[i], settings.auditSampleRate, scoredAt, `payments[${entry.index}].`);
    if (scored.ok) entry.scored = scored.value;
    else entries[entry.index] = { index: entry.index, state: "refused", status: 400, error: "invalid-request", problems: scored.problems };
  });

  const withReview = valid.filter((e) => e.scored?.review && entries[e.index] === e);
  const accepted = await sendReviewItems(c.env.FLAGS, withReview.map((e) => e.scored!.review!));
  withReview.forEach((entry, i) => {
    if (!accepted[i]) entries[entry.index] = handoffRefusal(entry.index, entry.payment.transactionId);
  });
  const shadows: ShadowMessage[] = [];
  for (const entry of valid) {
    if (entries[entry.index] !== entry || !entry.scored) continue;
    answers.set(entry.key, { bodyHash: entry.bodyHash, answer: entry.scored.answer });
    if (entry.scored.shadow) shadows.push(entry.scored.shadow);
  }
  if (shadows.length > 0) c.executionCtx.waitUntil(sendShadowComparisons(c.env.FLAGS, shadows));
  const fresh = valid.filter((e) => entries[e.index] === e && e.scored);
  countScored(c.env, c.executionCtx, snapshot.live, fresh.map((e) => ({ raw: e.payment.raw, answer: e.scored!.answer, scoredAt })));

  const counts = { scored: 0, refused: 0, review: 0, auditSample: 0 };
  const results = entries.map((entry) => {
    const resolved = entry.state === "same-as" ? { ...entries[entry.of], index: entry.index } : entry;
    const answer = resolved.state === "remembered" ? resolved.answer : resolved.state === "valid" ? resolved.scored?.answer : undefined;
    if (answer) {
      counts.scored++;
      if (answer.decision === "review") counts.review++;
      if (answer.auditSample) counts.auditSample++;
      return { index: entry.index, outcome: "scored" as const, result: answer };
    }
    counts.refused++;
    const refusal = resolved as Extract<BatchEntry, { state: "refused" }>;
    return {
      index: entry.index,
      outcome: "refused" as const,
      status: refusal.status,
      error: refusal.error,
      problems: refusal.problems,
      ...(refusal.retryable !== undefined ? { retryable: refusal.retryable } : {}),
    };
  });
  return c.json({ modelVersion: version, results, counts });
});

/** 503 when no model has ever loaded in this isolate: the flow applies its fail-open/closed policy. */
function noModel(c: Context<AppEnv>, settings: Settings): Response {
  const retryAfter = String(Math.max(1, Math.ceil(settings.modelRefreshMs / 1000)));
  return problemResponse(
    c,
    503,
    "no-model",
    [{ field: "model", rule: "no model is loaded: none has been activated, or KV cannot be read; retry after the Retry-After seconds" }],
    { retryable: true, headers: { "retry-after": retryAfter } },
  );
}

function conflictProblem(field: string, transactionId: string, version: string): Problem {
  return {
    field,
    rule: `${JSON.stringify(transactionId)} was already scored under model ${version} with different features, segment or accountRef; a transactionId names one payment`,
  };
}

function handoffProblem(field: string, transactionId: string): Problem {
  return { field, rule: `the review hand-off of ${JSON.stringify(transactionId)} could not be enqueued; send the same request again` };
}

function handoffFailed(c: Context<AppEnv>, field: string, transactionId: string): Response {
  return problemResponse(c, 503, "handoff-failed", [handoffProblem(field, transactionId)], { retryable: true, headers: { "retry-after": "1" } });
}

function handoffRefusal(index: number, transactionId: string): BatchEntry {
  return {
    index,
    state: "refused",
    status: 503,
    error: "handoff-failed",
    problems: [handoffProblem(`payments[${index}].transactionId`, transactionId)],
    retryable: true,
  };
}
