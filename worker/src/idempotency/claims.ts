/**
 * Durable idempotency of the payment flow's calls: the one function the scoring path calls before
 * scoring ({@link claimTransactions}) and the one it hands to `waitUntil` after answering
 * ({@link rememberAnswers}).
 *
 * A transaction id names one payment for IDEMPOTENCY_WINDOW_SECONDS (default 24 h) from its first
 * sight, on every isolate: sent again with the same content it gets the same answer; with other
 * content, 409 (and the conflict goes to the review store for the analysts). The ids live in
 * {@link IdempotencyObject}s, one per shard of the id space ({@link IDEMPOTENCY_SHARDS}), so each
 * payment costs one awaited round trip to one object and nothing more on its path (a batch: one per
 * shard involved, at most eight): the answer is kept afterwards, through `waitUntil`.
 *
 * "The same answer": the answer stored for the id, once the first call has finished; its review item
 * is kept beside it and handed off again with each repeat (the review store keeps one row), so a
 * review item lost after an accepted hand-off comes back with the flow's retry. A repeat that
 * arrives while the first is still in flight (or whose first call never finished) is scored again,
 * which gives the same answer under the same model version because scoring is a pure function of
 * (model version, request) and the audit draw is a function of the id (audit-sample.ts); its review
 * item is handed off again and the review store keeps one row. Under a newer model the stored answer
 * is the one returned.
 */
import type { ClaimRequest, ClaimVerdict, IdempotencyObject, RememberRequest } from "./idempotency-object";

/**
 * Shards of the id space. Few on purpose: a batch asks every shard its ids fall in, once to claim
 * and once to keep the answers, so a batch of 100 makes at most 2 × 8 Durable Object calls (each a
 * subrequest and a storage commit). With 128 shards it made 2 × 55 to 85: each batch took seconds
 * and passed the Workers Free plan's 50 subrequests a request. Eight objects still carry about
 * 4,000 single payments a second (two calls each; a Durable Object serves about a thousand calls a
 * second: Cloudflare's Durable Objects FAQ, "How much work can a single Durable Object do?") and
 * about 50,000 a second in batches of 100. Fixed: changing it moves ids to other objects, which
 * would forget every id still inside the window.
 */
export const IDEMPOTENCY_SHARDS = 8;

/** The binding the worker needs (wrangler.toml `[[durable_objects.bindings]]`). */
export interface IdempotencyEnv {
  IDEMPOTENCY: DurableObjectNamespace<IdempotencyObject>;
}

/** A verdict, or `unavailable` when the store could not be asked (the payment is scored all the same). */
export type Claim = ClaimVerdict | { kind: "unavailable" };

/**
 * Shard of a transaction id: FNV-1a (32-bit) of its UTF-16 units, modulo the shard count. Not a
 * secret: ids are spread, not hidden.
 *
 * @example
 * shardOf("pay-000123") // → the same number in [0, 8) on every isolate
 */
export function shardOf(transactionId: string): number {
  let hash = 0x811c9dc5;
  for (let i = 0; i < transactionId.length; i++) {
    hash ^= transactionId.charCodeAt(i);
    hash = Math.imul(hash, 0x01000193);
  }
  return (hash >>> 0) % IDEMPOTENCY_SHARDS;
}

function stub(env: IdempotencyEnv, shard: number): DurableObjectStub<IdempotencyObject> {
  return env.IDEMPOTENCY.get(env.IDEMPOTENCY.idFromName(`transactions-${shard}`));
}

/** Groups requests by shard, keeping each one's position. */
function byShard<T extends { transactionId: string }>(requests: readonly T[]): Map<number, { request: T; position: number }[]> {
  const groups = new Map<number, { request: T; position: number }[]>();
  requests.forEach((request, position) => {
    const shard = shardOf(request.transactionId);
    const group = groups.get(shard);
    if (group) group.push({ request, position });
    else groups.set(shard, [{ request, position }]);
  });
  return groups;
}

/**
 * Claims transaction ids: one call per shard involved, all at once (a single payment: one round
 * trip). Never rejects: a shard that cannot be reached answers `unavailable` for its ids, and the
 * failure is logged once per shard.
 *
 * @example
 * const [claim] = await claimTransactions(env, [{ transactionId: "pay-1", contentHash }], Date.now(), 86_400_000);
 * if (claim.kind === "conflict") … // 409
 */
export async function claimTransactions(env: IdempotencyEnv, requests: readonly ClaimRequest[], nowMs: number, windowMs: number): Promise<Claim[]> {
  const claims = new Array<Claim>(requests.length).fill({ kind: "unavailable" });
  await Promise.all(
    [...byShard(requests)].map(async ([shard, group]) => {
      try {
        const verdicts = await stub(env, shard).claim(
          group.map((g) => ({ transactionId: g.request.transactionId, contentHash: g.request.contentHash })),
          nowMs,
          windowMs,
        );
        group.forEach((g, k) => (claims[g.position] = verdicts[k] as ClaimVerdict));
      } catch (error) {
        console.error(JSON.stringify({ event: "idempotency-store-unavailable", shard, ids: group.length, error: String(error) }));
      }
    }),
  );
  return claims;
}

/**
 * Keeps the answers given, for later repeats (hand the promise to `waitUntil`); never rejects.
 *
 * @example
 * executionCtx.waitUntil(rememberAnswers(env, [{ transactionId, contentHash, answer: JSON.stringify(answer) }]));
 */
export async function rememberAnswers(env: IdempotencyEnv, requests: readonly RememberRequest[]): Promise<void> {
  await Promise.all(
    [...byShard(requests)].map(async ([shard, group]) => {
      try {
        await stub(env, shard).remember(group.map((g) => g.request));
      } catch (error) {
        console.error(JSON.stringify({ event: "idempotency-remember-failed", shard, ids: group.length, error: String(error) }));
      }
    }),
  );
}

/**
 * SHA-256 (hex) of what determines a payment's answer besides its id: the features or the payment
 * record's fields (keys sorted,
 * so key order does not matter), the segment and the account reference.
 *
 * @example
 * await contentHash({ amount: 1, items: 2 }, "web", null) === await contentHash({ items: 2, amount: 1 }, "web", null) // → true
 */
export async function contentHash(features: Readonly<Record<string, unknown>>, segment: string | null, accountRef: string | null): Promise<string> {
  const names = Object.keys(features).sort();
  const text = JSON.stringify([names.map((name) => [name, features[name]]), segment, accountRef]);
  const digest = new Uint8Array(await crypto.subtle.digest("SHA-256", new TextEncoder().encode(text)));
  let hex = "";
  for (const byte of digest) hex += byte.toString(16).padStart(2, "0");
  return hex;
}
