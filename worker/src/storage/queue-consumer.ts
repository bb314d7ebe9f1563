/**
 * Consumer of the hand-off queue: writes flagged and audit-sampled payments (and shadow
 * comparisons, and aggregated traffic counts) to D1, idempotently, and never throws.
 *
 * Why never throw: if `queue()` throws, the runtime retries the whole batch, including messages
 * already acknowledged (the local simulator does exactly that). So every message is settled
 * explicitly with `ack()` or `retry()`, and the inserts are `ON CONFLICT … DO NOTHING`, so a
 * message written twice still makes one row. A review item or conflict of an account erased since
 * the payment was scored is not written (erasure_events, docs/privacy.md).
 *
 * Two queues feed this handler:
 * - `isodense-flags`: the whole batch is one `DB.batch([...])` (one transaction, one round trip).
 *   On failure every message is retried at once; after 5 failed retries the platform moves it to
 *   the dead-letter queue.
 * - `isodense-flags-dead`: messages are written one by one (so one unwritable row cannot hold the
 *   others back), and a failure is retried with exponential back-off, 2 s doubling to 1 h, for up
 *   to 100 retries (≈ 3.7 days). On the last attempt the full message is logged before the retry,
 *   because the platform deletes a message once a queue without its own dead-letter queue has
 *   exhausted its retries (docs/worker.md: alert on the dead-letter backlog).
 */
import { sha256Hex } from "../../../shared-model/src";
import type { Env } from "../env";
import { handoffMessageSchema, type HandoffMessage } from "./messages";
import { countsStatements } from "../insights/counts-store";
import { conflictInsert, reviewItemInsert, shadowScoreInsert } from "./review-store";

/** Queues whose name ends with this suffix are dead-letter queues. */
export const DEAD_LETTER_SUFFIX = "-dead";
/** `max_retries` of the dead-letter consumer in wrangler.toml (the platform's maximum). */
export const DEAD_LETTER_MAX_RETRIES = 100;
/** Longest back-off between two dead-letter attempts, in seconds. */
export const DEAD_LETTER_MAX_DELAY_SECONDS = 3600;

/**
 * Back-off before the next dead-letter attempt: 2^attempts seconds, capped at one hour.
 *
 * @param attempts delivery attempts so far (1 on the first delivery).
 * @example
 * deadLetterDelaySeconds(1) // → 2
 * deadLetterDelaySeconds(20) // → 3600
 */
export function deadLetterDelaySeconds(attempts: number): number {
  const exponent = Math.max(1, Math.min(attempts, 12));
  return Math.min(2 ** exponent, DEAD_LETTER_MAX_DELAY_SECONDS);
}

/**
 * `queue()` handler for both the hand-off queue and its dead-letter queue.
 *
 * @example
 * export default { fetch: app.fetch, queue: handleHandoffBatch } satisfies ExportedHandler<Env, unknown>;
 */
export async function handleHandoffBatch(batch: MessageBatch<unknown>, env: Env): Promise<void> {
  const deadLetter = batch.queue.endsWith(DEAD_LETTER_SUFFIX);
  try {
    if (deadLetter) await writeOneByOne(batch, env);
    else await writeAsOneBatch(batch, env);
  } catch (error) {
    // Only reachable through a bug above; settle everything still open rather than throw.
    logEvent("handoff-consumer-bug", { queue: batch.queue, error: describeError(error) });
    for (const message of batch.messages) settle(() => message.retry());
  }
}

/** A message whose body validated, with its prepared insert. */
interface Writable {
  message: Message<unknown>;
  statements: D1PreparedStatement[];
}

/** Main queue: one transaction for the whole batch; all-or-nothing, then ack or retry each. */
async function writeAsOneBatch(batch: MessageBatch<unknown>, env: Env): Promise<void> {
  const receivedAt = new Date().toISOString();
  const writable: Writable[] = [];
  for (const message of batch.messages) {
    const statements = await prepare(message, env, receivedAt);
    if (statements) writable.push({ message, statements });
    // A body that does not validate can never be written; retrying sends it on to the
    // dead-letter queue, where it is logged in full instead of vanishing here.
    else settle(() => message.retry());
  }
  if (writable.length === 0) return;
  try {
    await env.DB.batch(writable.flatMap((w) => w.statements));
  } catch (error) {
    logEvent("review-store-write-failed", { queue: batch.queue, messages: writable.length, error: describeError(error) });
    for (const w of writable) settle(() => w.message.retry());
    return;
  }
  for (const w of writable) settle(() => w.message.ack());
}

/** Dead-letter queue: one write per message, back-off on failure, full log on the last attempt. */
async function writeOneByOne(batch: MessageBatch<unknown>, env: Env): Promise<void> {
  const receivedAt = new Date().toISOString();
  for (const message of batch.messages) {
    const statements = await prepare(message, env, receivedAt);
    if (!statements) {
      // Nothing can ever write it: keep the whole body in the logs and stop redelivering.
      logEvent("handoff-message-unwritable", { queue: batch.queue, id: message.id, body: message.body });
      settle(() => message.ack());
      continue;
    }
    try {
      await env.DB.batch(statements);
      settle(() => message.ack());
    } catch (error) {
      const finalAttempt = message.attempts >= DEAD_LETTER_MAX_RETRIES + 1;
      logEvent(finalAttempt ? "handoff-final-attempt-failed" : "review-store-write-failed", {
        queue: batch.queue,
        id: message.id,
        attempts: message.attempts,
        error: describeError(error),
        ...(finalAttempt ? { body: message.body } : {}),
      });
      settle(() => message.retry({ delaySeconds: deadLetterDelaySeconds(message.attempts) }));
    }
  }
}

/** Validates a body and prepares its statements; null when the body is not a hand-off message. */
async function prepare(message: Message<unknown>, env: Env, receivedAt: string): Promise<D1PreparedStatement[] | null> {
  const parsed = handoffMessageSchema.safeParse(message.body);
  if (!parsed.success) {
    logEvent("handoff-message-invalid", {
      id: message.id,
      problems: parsed.error.issues.slice(0, 5).map((i) => `${i.path.join(".")}: ${i.message}`),
    });
    return null;
  }
  try {
    return statementFor(env, parsed.data, receivedAt, await subjectOf(parsed.data));
  } catch (error) {
    logEvent("handoff-message-unbindable", { id: message.id, error: describeError(error) });
    return null;
  }
}

function statementFor(env: Env, body: HandoffMessage, receivedAt: string, subject: string | null): D1PreparedStatement[] {
  if (body.kind === "counts") return countsStatements(env, body, receivedAt);
  if (body.kind === "conflict") return [conflictInsert(env, body, subject)];
  return [body.kind === "review" ? reviewItemInsert(env, body, receivedAt, subject) : shadowScoreInsert(env, body)];
}

/** The digest erasure_events keeps of the message's account, for the "erased since" check. */
async function subjectOf(body: HandoffMessage): Promise<string | null> {
  const account = body.kind === "review" || body.kind === "conflict" ? body.accountRef : null;
  return account === null ? null : sha256Hex(account);
}

/** `ack()`/`retry()` are not expected to throw; if one does, the handler must still not throw. */
function settle(action: () => void): void {
  try {
    action();
  } catch (error) {
    logEvent("handoff-settle-failed", { error: describeError(error) });
  }
}

function describeError(error: unknown): string {
  return error instanceof Error ? error.message : String(error);
}

/** One JSON line per event, so Workers Logs / `wrangler tail` can be filtered by `event`. */
function logEvent(event: string, fields: Record<string, unknown>): void {
  console.error(JSON.stringify({ event, ...fields }));
}
