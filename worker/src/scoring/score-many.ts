/**
 * The one scoring path behind `POST /v1/score` (a batch of one) and `POST /v1/score/batch`:
 * validate every payment, claim its transaction id in the durable idempotency store (one awaited
 * round trip per shard involved), answer repeats with the stored answer, refuse conflicting repeats
 * (409, recorded for the analysts), derive the payment records' features at their accounts'
 * histories (a second awaited round trip, only for the payment form), score, hand the review items off, keep the answers (after the
 * response, through `waitUntil`) and count the traffic. Each payment ends as an {@link Outcome}:
 * scored, or refused with the status it would have had alone.
 *
 * Idempotency (idempotency/claims.ts): a transaction id names one payment for the idempotency
 * window on every isolate. If the store cannot be reached the payment is scored all the same (a
 * review item matters more than a refusal) and the miss is counted in `/v1/health`. The review
 * store keeps one row per (transaction, model version) in any case.
 */
import type { Env, Problem } from "../env";
import { countScored } from "../insights/count-scored";
import type { BatchItem, ScoreAnswer } from "../contract/scoring";
import type { Settings } from "../settings";
import type { ConflictMessage, ReviewMessage, ShadowMessage } from "../storage/messages";
import { claimTransactions, contentHash, rememberAnswers, type Claim } from "../idempotency/claims";
import { auditPosition } from "./audit-sample";
import { counters } from "./counters";
import { sendConflicts, sendReviewItems, sendShadowComparisons } from "./handoff";
import type { ModelSnapshot } from "./model-cache";
import { deriveAtAccounts, type HistoryOutcome } from "../history/history-client";
import type { PendingPayment } from "../history/payment-form";
import { fieldPath } from "../problems";
import { completePayment, isPending, scorePayment, validatePayment, type ScoredPayment, type ValidPayment } from "./score-payment";

/** The `[vars]` the scoring path reads (the loop's own variables never fail a payment). */
export const SCORING_SETTINGS = [
  "AUDIT_SAMPLE_RATE",
  "MODEL_REFRESH_SECONDS",
  "MAX_BATCH",
  "MAX_BATCH_ACCOUNTS",
  "IDEMPOTENCY_WINDOW_SECONDS",
  "PAYMENT_CLOCK_TOLERANCE_SECONDS",
  "HISTORY_TIMEOUT_MS",
] as const;

/** How one payment ended: its answer, or the refusal it would have had alone (declared in the API contract). */
export type Outcome = BatchItem;

/** What the idempotency store keeps for an answered id: the answer and its review item, if any. */
interface StoredOutcome {
  answer: ScoreAnswer;
  review: ReviewMessage | null;
}

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
  /** Answered before: the stored answer, and its review item, sent again (the review store keeps one row). */
  | { index: number; state: "remembered"; answer: ScoreAnswer; review: ReviewMessage | null }
  /** Checked; a payment record (`PendingPayment`) until its account's history has derived its features. */
  | { index: number; state: "valid"; payment: ValidPayment | PendingPayment; bodyHash: string; claim?: Claim; scored?: ScoredPayment }
  | { index: number; state: "same-as"; of: number };

type ValidEntry = Extract<Entry, { state: "valid" }>;
type ReadyEntry = ValidEntry & { payment: ValidPayment };

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
  const nowMs = Date.now();
  const entries: Entry[] = [];
  const conflicts: ConflictMessage[] = [];
  // First occurrence of each transactionId in this call: a later duplicate shares its outcome.
  const firstInCall = new Map<string, { index: number; bodyHash: string }>();
  for (let index = 0; index < payments.length; index++) {
    const prefix = prefixOf(index);
    const checked = validatePayment(payments[index], snapshot.live, prefix, { nowMs, toleranceMs: settings.PAYMENT_CLOCK_TOLERANCE_SECONDS * 1000 });
    if (!checked.ok) {
      entries.push({ index, state: "refused", refusal: refusal(index, 400, "invalid-request", checked.problems) });
      continue;
    }
    const payment = checked.value;
    const bodyHash = await contentHash(isPending(payment) ? payment.fields : payment.features, payment.segment, payment.accountRef);
    const earlier = firstInCall.get(payment.transactionId);
    if (earlier) {
      if (earlier.bodyHash === bodyHash) entries.push({ index, state: "same-as", of: earlier.index });
      else {
        entries.push({ index, state: "refused", refusal: conflictRefusal(index, prefix, payment.transactionId, nowMs) });
        conflicts.push(conflictMessage(payment, bodyHash, earlier.bodyHash, nowMs, nowMs, version));
      }
      continue;
    }
    firstInCall.set(payment.transactionId, { index, bodyHash });
    entries.push({ index, state: "valid", payment, bodyHash });
  }

  const claimed = entries.filter((e): e is ValidEntry => e.state === "valid");
  // Ids are claimed first; only then do payment records still open (not answered from the
  // idempotency store, not refused as a conflict) go to their accounts' histories, so a refused
  // repeat leaves no trace there. Recording and then undoing would not do: another payment of the
  // account could be derived in between, and a late or far-off record can fold or reset the history.
  const claims = await claimTransactions(
    env,
    claimed.map((e) => ({ transactionId: e.payment.transactionId, contentHash: e.bodyHash })),
    nowMs,
    settings.IDEMPOTENCY_WINDOW_SECONDS * 1000,
  );
  claimed.forEach((entry, i) => {
    const claim = claims[i];
    entry.claim = claim;
    if (claim.kind === "unavailable") counters.idempotencyUnavailable++;
    if (claim.kind === "conflict") {
      entries[entry.index] = { index: entry.index, state: "refused", refusal: conflictRefusal(entry.index, prefixOf(entry.index), entry.payment.transactionId, claim.firstSeenMs) };
      conflicts.push(conflictMessage(entry.payment, entry.bodyHash, claim.firstContentHash, claim.firstSeenMs, nowMs, version));
    } else if (claim.kind === "repeat" && claim.answer !== null) {
      const stored = JSON.parse(claim.answer) as StoredOutcome;
      entries[entry.index] = { index: entry.index, state: "remembered", answer: stored.answer, review: stored.review };
    }
  });

  // Payment records still open take the features their histories derive (and record).
  const open = claimed.filter((e) => entries[e.index] === e);
  completeFromHistory(call, entries, await deriveFromHistory(call, open), prefixOf);

  const scoredAt = new Date().toISOString();
  const valid = claimed.filter((e): e is ReadyEntry => entries[e.index] === e && !isPending(e.payment));
  const positions = await Promise.all(valid.map((e) => auditPosition(e.payment.transactionId)));
  valid.forEach((entry, i) => {
    const scored = scorePayment(snapshot, entry.payment, positions[i], settings.AUDIT_SAMPLE_RATE, scoredAt, prefixOf(entry.index));
    if (scored.ok) entry.scored = scored.value;
    else entries[entry.index] = { index: entry.index, state: "refused", refusal: refusal(entry.index, 400, "invalid-request", scored.problems) };
  });

  const stillValid = () => valid.filter((e) => entries[e.index] === e && e.scored);
  // Review items of fresh answers, and those of remembered ones again: a hand-off accepted earlier
  // may still have been lost before the store (a dead local queue), and the store keeps one row.
  const withReview = [
    ...stillValid()
      .filter((e) => e.scored!.review)
      .map((e) => ({ index: e.index, transactionId: e.payment.transactionId, review: e.scored!.review! })),
    ...entries.flatMap((e) => (e.state === "remembered" && e.review ? [{ index: e.index, transactionId: e.answer.transactionId, review: e.review }] : [])),
  ];
  const accepted = await sendReviewItems(
    env.FLAGS,
    withReview.map((e) => e.review),
  );
  withReview.forEach((entry, i) => {
    if (accepted[i]) return;
    const problem = {
      field: `${prefixOf(entry.index)}transactionId`,
      rule: `the review hand-off of ${JSON.stringify(entry.transactionId)} could not be enqueued; send the same request again`,
    };
    entries[entry.index] = { index: entry.index, state: "refused", refusal: refusal(entry.index, 503, "handoff-failed", [problem], true) };
  });
  const fresh = stillValid();
  const shadows: ShadowMessage[] = [];
  for (const entry of fresh) if (entry.scored!.shadow) shadows.push(entry.scored!.shadow);
  if (shadows.length > 0) executionCtx.waitUntil(sendShadowComparisons(env.FLAGS, shadows));
  // Kept only once handed off: a repeat after a failed hand-off is scored and handed off again.
  const toRemember = fresh.filter((e) => e.claim?.kind !== "unavailable");
  if (toRemember.length > 0) {
    executionCtx.waitUntil(
      rememberAnswers(
        env,
        toRemember.map((e) => {
          const stored: StoredOutcome = { answer: e.scored!.answer, review: e.scored!.review };
          return { transactionId: e.payment.transactionId, contentHash: e.bodyHash, answer: JSON.stringify(stored) };
        }),
      ),
    );
  }
  if (conflicts.length > 0) await sendConflicts(env.FLAGS, conflicts);
  countScored(
    env,
    executionCtx,
    snapshot.live,
    fresh.map((e) => ({ raw: e.payment.raw, answer: e.scored!.answer, scoredAt })),
  );

  return entries.map((entry) => {
    const resolved = entry.state === "same-as" ? entries[entry.of] : entry;
    if (resolved.state === "remembered") return { index: entry.index, outcome: "scored", result: resolved.answer };
    if (resolved.state === "valid") return { index: entry.index, outcome: "scored", result: resolved.scored!.answer };
    if (resolved.state === "refused") return { ...resolved.refusal, index: entry.index };
    throw new Error(`payment ${entry.index} refers to another duplicate`);
  });
}

/** Payment-form entries and what their accounts' histories answered, in the same order. */
interface Derivation {
  pending: (ValidEntry & { payment: PendingPayment })[];
  outcomes: HistoryOutcome[];
}

/**
 * Derives the payment-form entries' features at their accounts' histories (one call per account,
 * bounded by HISTORY_TIMEOUT_MS); the histories record the payments.
 */
async function deriveFromHistory(call: ScoringCall, checked: readonly ValidEntry[]): Promise<Derivation> {
  const pending = checked.filter((e): e is ValidEntry & { payment: PendingPayment } => isPending(e.payment));
  if (pending.length === 0) return { pending, outcomes: [] };
  const model = call.snapshot.live;
  if (model.recordSpec === null) throw new Error(`payment records were accepted for model ${model.version}, which has no record spec`);
  const records = pending.map((e) => e.payment.record);
  const outcomes = await deriveAtAccounts(call.env.ACCOUNT_HISTORY, model.version, model.recordSpec, records, call.settings.HISTORY_TIMEOUT_MS);
  return { pending, outcomes };
}

/**
 * Completes the payment-form entries still open with their derived features, or refuses them: 400
 * for a record the derivation refuses, 503 `history-unavailable` (retryable) when the history store
 * failed or did not answer in time.
 */
function completeFromHistory(call: ScoringCall, entries: Entry[], { pending, outcomes }: Derivation, prefixOf: (index: number) => string): void {
  const model = call.snapshot.live;
  pending.forEach((entry, i) => {
    if (entries[entry.index] !== entry) return;
    const outcome = outcomes[i];
    const prefix = prefixOf(entry.index);
    const refuse = (r: Refusal) => {
      entries[entry.index] = { index: entry.index, state: "refused", refusal: r };
    };
    if (!outcome.ok) {
      if ("unavailable" in outcome) {
        const rule =
          `the history of account ${JSON.stringify(entry.payment.accountRef)} could not be read in time (HISTORY_TIMEOUT_MS ${call.settings.HISTORY_TIMEOUT_MS}); ` +
          "send the same request again (a payment already recorded is not counted twice)";
        refuse(refusal(entry.index, 503, "history-unavailable", [{ field: `${prefix}payment`, rule }], true));
      } else refuse(refusal(entry.index, 400, "invalid-request", [{ field: fieldPath(prefix, ["payment", outcome.field]), rule: outcome.rule }]));
      return;
    }
    const completed = completePayment(entry.payment, model, outcome.raw, prefix);
    if (completed.ok) (entry as ValidEntry).payment = completed.value;
    else refuse(refusal(entry.index, 400, "invalid-request", completed.problems));
  });
}

function refusal(index: number, status: Refusal["status"], error: string, problems: Problem[], retryable?: boolean): Refusal {
  return { index, outcome: "refused", status, error, problems, ...(retryable !== undefined ? { retryable } : {}) };
}

function conflictRefusal(index: number, prefix: string, transactionId: string, firstSeenMs: number): Refusal {
  return refusal(index, 409, "conflict", [
    {
      field: `${prefix}transactionId`,
      rule:
        `${JSON.stringify(transactionId)} was first seen at ${new Date(firstSeenMs).toISOString()} with different features, segment or accountRef; ` +
        "a transactionId names one payment for the idempotency window (IDEMPOTENCY_WINDOW_SECONDS): send a new payment under a new id",
    },
  ]);
}

function conflictMessage(
  payment: ValidPayment | PendingPayment,
  contentHash: string,
  firstContentHash: string,
  firstSeenMs: number,
  nowMs: number,
  modelVersion: string,
): ConflictMessage {
  return {
    kind: "conflict",
    transactionId: payment.transactionId,
    firstSeenAt: new Date(firstSeenMs).toISOString(),
    at: new Date(nowMs).toISOString(),
    firstContentHash,
    contentHash,
    modelVersion,
    segment: payment.segment,
    accountRef: payment.accountRef,
    // A payment record's features are not derived for a refused repeat: its fields are not stored.
    features: isPending(payment) ? {} : payment.features,
  };
}
