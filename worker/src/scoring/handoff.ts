/**
 * Sending to the hand-off queue from the request path.
 *
 * Review items are awaited before the flow gets its answer: a `send()` that resolved is stored by
 * the Queues service (durable), whereas work left to `waitUntil` dies with the isolate. A failed
 * send therefore fails the payment with a retryable 503, never a silent loss. Shadow comparisons
 * are evidence for a promotion decision, not for a payment: they go through `waitUntil`, best
 * effort, so that a shadow never adds latency to the flow (a lost one thins the sample only).
 * Conflict records (a transaction id sent again with other content) are awaited on the 409 path,
 * which is not the payment's usual path, so the analysts' record does not die with the isolate.
 */
import { QUEUE_LIMITS, type ConflictMessage, type HandoffMessage, type ReviewMessage, type ShadowMessage } from "../storage/messages";
import { counters } from "./counters";

/** Splits messages into `sendBatch` calls within the platform's count and byte limits. */
export function chunkForSend<T>(messages: readonly T[], size: (message: T) => number = jsonBytes): T[][] {
  const chunks: T[][] = [];
  let current: T[] = [];
  let bytes = 0;
  for (const message of messages) {
    const b = size(message);
    if (current.length > 0 && (current.length >= QUEUE_LIMITS.batchMessages || bytes + b > QUEUE_LIMITS.batchBytes)) {
      chunks.push(current);
      current = [];
      bytes = 0;
    }
    current.push(message);
    bytes += b;
  }
  if (current.length > 0) chunks.push(current);
  return chunks;
}

/**
 * Enqueues review items, awaiting the queue's acknowledgement. Returns, per message, whether it
 * was accepted; a chunk that fails marks all its messages as not accepted.
 *
 * @example
 * const accepted = await sendReviewItems(env.FLAGS, [message]); // → [true]
 */
export async function sendReviewItems(queue: Queue<HandoffMessage>, messages: readonly ReviewMessage[]): Promise<boolean[]> {
  if (messages.length === 1) {
    try {
      await queue.send(messages[0], { contentType: "json" });
      return [true];
    } catch (error) {
      reportSendFailure(1, error);
      return [false];
    }
  }
  const indexed = messages.map((message, index) => ({ message, index }));
  const accepted = new Array<boolean>(messages.length).fill(false);
  await Promise.all(
    chunkForSend(indexed, (m) => jsonBytes(m.message)).map(async (chunk) => {
      try {
        await queue.sendBatch(chunk.map((m) => ({ body: m.message, contentType: "json" as const })));
        for (const m of chunk) accepted[m.index] = true;
      } catch (error) {
        reportSendFailure(chunk.length, error);
      }
    }),
  );
  return accepted;
}

/**
 * Enqueues shadow comparisons, best effort (hand the promise to `waitUntil`); never rejects.
 *
 * @example
 * c.executionCtx.waitUntil(sendShadowComparisons(env.FLAGS, shadows));
 */
export async function sendShadowComparisons(queue: Queue<HandoffMessage>, messages: readonly ShadowMessage[]): Promise<void> {
  await Promise.all(
    chunkForSend(messages).map(async (chunk) => {
      try {
        await queue.sendBatch(chunk.map((body) => ({ body, contentType: "json" as const })));
      } catch (error) {
        counters.shadowSendFailures += chunk.length;
        console.error(JSON.stringify({ event: "shadow-send-failed", messages: chunk.length, error: String(error) }));
      }
    }),
  );
}

/**
 * Enqueues records of conflicting repeats for the review store, awaited; never rejects (a failure
 * is logged with the full records, so they can be replayed from the logs, and counted).
 *
 * @example
 * await sendConflicts(env.FLAGS, conflicts);
 */
export async function sendConflicts(queue: Queue<HandoffMessage>, messages: readonly ConflictMessage[]): Promise<void> {
  await Promise.all(
    chunkForSend(messages).map(async (chunk) => {
      try {
        await queue.sendBatch(chunk.map((body) => ({ body, contentType: "json" as const })));
      } catch (error) {
        counters.conflictSendFailures += chunk.length;
        console.error(JSON.stringify({ event: "conflict-send-failed", messages: chunk, error: String(error) }));
      }
    }),
  );
}

function reportSendFailure(count: number, error: unknown): void {
  counters.handoffSendFailures += count;
  console.error(JSON.stringify({ event: "handoff-send-failed", messages: count, error: error instanceof Error ? error.message : String(error) }));
}

function jsonBytes(message: unknown): number {
  // JSON text length in UTF-16 units; our messages are ASCII apart from feature names, and the
  // limits leave room for the envelope.
  return JSON.stringify(message).length + 100;
}
