/**
 * The one scoring path behind `POST /v1/score` (a batch of one) and `POST /v1/score/batch`:
 * validate every payment, answer repeats from this isolate's memory, score, hand the review items
 * off, remember the answers and count the traffic. Each payment ends as an {@link Outcome}: scored,
 * or refused with the status it would have had alone.
 *
 * Idempotency: the answer is a pure function of (model version, request); the isolate also
 * remembers recent answers by (model version, transactionId), so a repeat gets the identical
 * answer with no second hand-off, and a repeat with different content gets 409. The review store
 * keeps one row per (transaction, model version) in any case.
 */
import type { Env, Problem } from "../env";
import { countScored } from "../insights/count-scored";
import type { ScoreAnswer } from "../routes/schemas";
import type { Settings } from "../settings";
import type { ShadowMessage } from "../storage/messages";
import { AnswerCache, answerKey, contentHash } from "./answer-cache";
import { auditPosition } from "./audit-sample";
import { sendReviewItems, sendShadowComparisons } from "./handoff";
import type { ModelSnapshot } from "./model-cache";
import { scorePayment, validatePayment, type ScoredPayment, type ValidPayment } from "./score-payment";

/** The `[vars]` the scoring path reads (the loop's own variables never fail a payment). */
export const SCORING_SETTINGS = ["AUDIT_SAMPLE_RATE", "MODEL_REFRESH_SECONDS", "MAX_BATCH"] as const;

/** Recent answers of this isolate (module scope). */
const answers = new AnswerCache<ScoreAnswer>();

/** How one payment ended: its answer, or the refusal it would have had alone. */
export type Outcome =
  | { index: number; outcome: "scored"; result: ScoreAnswer }
  | {
      index: number;
      outcome: "refused";
      /** The status this payment would have had alone. */
      status: 400 | 409 | 503;
      error: string;
      problems: Problem[];
      /** On 503: the same request may be sent again. */
      retryable?: boolean;
    };

/** A refusal. */
type Refusal = Extract<Outcome, { outcome: "refused" }>;

/** What one call works with: the bindings, the request's execution context, the models and settings. */
export interface ScoringCall {
  env: Env;
  executionCtx: Pick<ExecutionContext, "waitUntil">;
  snapshot: ModelSnapshot;
  settings: Pick<Settings, (typeof SCORING_SETTINGS)[number]>;
}

/** One payment while it is being worked on. */
type Entry =
  | { index: number; state: "refused"; refusal: Refusal }
  | { index: number; state: "remembered"; answer: ScoreAnswer }
  | { index: number; state: "valid"; payment: ValidPayment; key: string; bodyHash: string; scored?: ScoredPayment }
  | { index: number; state: "same-as"; of: number };

type ValidEntry = Extract<Entry, { state: "valid" }>;

/**
 * Scores payments as one unit of work; one outcome per payment, in order.
 *
 * @param prefixOf the field-path prefix of payment `index` in error answers (`""` for the single
 *   route, `payments[3].` for a batch).
 * @example
 * const [outcome] = await scoreMany(call, [body], () => "");
 */
export async function scoreMany(call: ScoringCall, payments: readonly unknown[], prefixOf: (index: number) => string): Promise<Outcome[]> {
  const { snapshot, settings, env, executionCtx } = call;
  const version = snapshot.live.version;
  const entries: Entry[] = [];
  // First occurrence of each transactionId in this call: a later duplicate shares its outcome.
  const firstInCall = new Map<string, { index: number; bodyHash: string }>();
  for (let index = 0; index < payments.length; index++) {
    const prefix = prefixOf(index);
    const checked = validatePayment(payments[index], snapshot.live, prefix);
    if (!checked.ok) {
      entries.push({ index, state: "refused", refusal: refusal(index, 400, "invalid-request", checked.problems) });
      continue;
    }
    const payment = checked.value;
    const key = answerKey(version, payment.transactionId);
    const bodyHash = await contentHash(payment.features, payment.segment, payment.accountRef);
    const conflict = () => refusal(index, 409, "conflict", [conflictProblem(`${prefix}transactionId`, payment.transactionId, version)]);
    const earlier = firstInCall.get(key);
    if (earlier) {
      entries.push(earlier.bodyHash === bodyHash ? { index, state: "same-as", of: earlier.index } : { index, state: "refused", refusal: conflict() });
      continue;
    }
    firstInCall.set(key, { index, bodyHash });
    const remembered = answers.get(key);
    if (remembered) {
      entries.push(
        remembered.bodyHash === bodyHash ? { index, state: "remembered", answer: remembered.answer } : { index, state: "refused", refusal: conflict() },
      );
      continue;
    }
    entries.push({ index, state: "valid", payment, key, bodyHash });
  }

  const scoredAt = new Date().toISOString();
  const valid = entries.filter((e): e is ValidEntry => e.state === "valid");
  const positions = await Promise.all(valid.map((e) => auditPosition(e.payment.transactionId)));
  valid.forEach((entry, i) => {
    const scored = scorePayment(snapshot, entry.payment, positions[i], settings.AUDIT_SAMPLE_RATE, scoredAt, prefixOf(entry.index));
    if (scored.ok) entry.scored = scored.value;
    else entries[entry.index] = { index: entry.index, state: "refused", refusal: refusal(entry.index, 400, "invalid-request", scored.problems) };
  });

  const stillValid = () => valid.filter((e) => entries[e.index] === e && e.scored);
  const withReview = stillValid().filter((e) => e.scored!.review);
  const accepted = await sendReviewItems(env.FLAGS, withReview.map((e) => e.scored!.review!));
  withReview.forEach((entry, i) => {
    if (accepted[i]) return;
    const problem = { field: `${prefixOf(entry.index)}transactionId`, rule: `the review hand-off of ${JSON.stringify(entry.payment.transactionId)} could not be enqueued; send the same request again` };
    entries[entry.index] = { index: entry.index, state: "refused", refusal: refusal(entry.index, 503, "handoff-failed", [problem], true) };
  });
  const fresh = stillValid();
  const shadows: ShadowMessage[] = [];
  for (const entry of fresh) {
    answers.set(entry.key, { bodyHash: entry.bodyHash, answer: entry.scored!.answer });
    if (entry.scored!.shadow) shadows.push(entry.scored!.shadow);
  }
  if (shadows.length > 0) executionCtx.waitUntil(sendShadowComparisons(env.FLAGS, shadows));
  countScored(env, executionCtx, snapshot.live, fresh.map((e) => ({ raw: e.payment.raw, answer: e.scored!.answer, scoredAt })));

  return entries.map((entry) => {
    const resolved = entry.state === "same-as" ? entries[entry.of] : entry;
    if (resolved.state === "remembered") return { index: entry.index, outcome: "scored", result: resolved.answer };
    if (resolved.state === "valid") return { index: entry.index, outcome: "scored", result: resolved.scored!.answer };
    if (resolved.state === "refused") return { ...resolved.refusal, index: entry.index };
    throw new Error(`payment ${entry.index} refers to another duplicate`);
  });
}

function refusal(index: number, status: Refusal["status"], error: string, problems: Problem[], retryable?: boolean): Refusal {
  return { index, outcome: "refused", status, error, problems, ...(retryable !== undefined ? { retryable } : {}) };
}

function conflictProblem(field: string, transactionId: string, version: string): Problem {
  return {
    field,
    rule: `${JSON.stringify(transactionId)} was already scored under model ${version} with different features, segment or accountRef; a transactionId names one payment`,
  };
}
