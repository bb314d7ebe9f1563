/**
 * Counts scored payments in this isolate's {@link TrafficTally} and, when a flush is due, sends
 * the counts to the hand-off queue inside `ctx.waitUntil`.
 *
 * Why `waitUntil` and not an awaited send: counts are statistics about traffic, not a payment's
 * hand-off, so the payment flow never waits for them. Why every N payments or T seconds: one
 * queue message per few hundred payments keeps the queue and D1 load tiny next to scoring, while
 * bounding what can be lost.
 *
 * What can be lost, and the bound: an isolate evicted (or crashing) between two flushes loses its
 * unflushed counts — at most DRIFT_FLUSH_PAYMENTS − 1 payments, or DRIFT_FLUSH_SECONDS of its
 * traffic while requests keep arriving (the age check runs on each request; an idle isolate holds
 * at most DRIFT_FLUSH_PAYMENTS − 1 until its next request or eviction). A send that fails puts the
 * counts back for the next flush. Lost counts thin the drift sample; they never touch a payment,
 * and flag-rate checks use the counted scored and flagged together, so a loss biases neither.
 */
import type { Env } from "../env";
import type { ScoreAnswer } from "../contract/scoring";
import type { LoadedModel } from "../scoring/model-cache";
import { readSettings, type Settings } from "../settings";
import { TrafficTally, type TallyModel } from "./tally";

/** This isolate's tally (module scope, like the model cache). */
export const trafficTally = new TrafficTally();

/** Models whose counts the tally may restore after a failed send, by version. */
const knownModels = new Map<string, TallyModel>();

/** One freshly scored payment (never a remembered answer: a repeat is not new traffic). */
export interface ScoredForCount {
  raw: ArrayLike<number>;
  answer: ScoreAnswer;
  scoredAt: string;
}

/**
 * Counts the payments and schedules a flush when one is due.
 *
 * @example
 * countScored(c.env, c.executionCtx, snapshot.live, [{ raw: payment.raw, answer, scoredAt }]);
 */
export function countScored(
  env: Pick<Env, "FLAGS" | "DRIFT_FLUSH_PAYMENTS" | "DRIFT_FLUSH_SECONDS">,
  ctx: Pick<ExecutionContext, "waitUntil">,
  live: LoadedModel,
  scored: readonly ScoredForCount[],
): void {
  let settings: Pick<Settings, "DRIFT_FLUSH_PAYMENTS" | "DRIFT_FLUSH_SECONDS">;
  try {
    settings = readSettings(env, ["DRIFT_FLUSH_PAYMENTS", "DRIFT_FLUSH_SECONDS"]);
  } catch (error) {
    // A malformed DRIFT_FLUSH_* variable must not fail payments that scored: count nothing and
    // say so (the weekly report stores the same configuration error where the model page shows it).
    console.error(JSON.stringify({ event: "traffic-count-misconfigured", error: String(error) }));
    return;
  }
  knownModels.set(live.version, live);
  for (const { raw, answer, scoredAt } of scored) {
    try {
      trafficTally.record(live, raw, { segment: answer.segment, mahalanobisSq: answer.mahalanobisSq, flagged: answer.decision === "review" }, scoredAt);
    } catch (error) {
      // Counting must never fail a payment that scored; a bug here shows in the logs.
      console.error(JSON.stringify({ event: "traffic-count-failed", error: String(error) }));
    }
  }
  const now = Date.now();
  if (!trafficTally.due(now, settings.DRIFT_FLUSH_PAYMENTS, settings.DRIFT_FLUSH_SECONDS * 1000)) return;
  const messages = trafficTally.drain(() => crypto.randomUUID());
  ctx.waitUntil(
    env.FLAGS.sendBatch(messages.map((body) => ({ body }))).catch((error: unknown) => {
      trafficTally.restore(messages, (version) => knownModels.get(version) ?? null);
      console.error(JSON.stringify({ event: "traffic-count-send-failed", messages: messages.length, error: String(error) }));
    }),
  );
}
