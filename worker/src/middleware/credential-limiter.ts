/**
 * Rate limiting of credential failures, per client, in the isolate's memory.
 *
 * A client (keyed by `cf-connecting-ip`, which Cloudflare sets on every request and a caller
 * cannot forge past the edge) that presents {@link FAILURE_LIMIT} wrong or malformed credentials
 * within {@link FAILURE_WINDOW_MS} is answered 429 with `Retry-After` on every request that carries
 * a credential, until the oldest of those failures leaves the window (a sliding window over the
 * failure times). While limited, a presented token is not even checked, so guessing gains no
 * information. Requests without an Authorization header are not counted: they reveal nothing.
 *
 * Why in-isolate only: tokens carry ≥ 128 bits, so the limiter is not what stops guessing; it keeps
 * a misconfigured or hostile client from burning CPU on hashing and from filling the logs. Each
 * isolate counts on its own, so a client spread over k isolates gets k × FAILURE_LIMIT tries per
 * window; a KV counter would not tighten that usefully (KV is eventually consistent and allows one
 * write per key per second) and would put a KV write on the failure path. docs/reliability.md says
 * where a platform rate-limiting rule fits instead.
 */

/** Failed credentials tolerated per client within the window. */
export const FAILURE_LIMIT = 20;
/** Length of the sliding window in milliseconds. */
export const FAILURE_WINDOW_MS = 60_000;
/** Most clients remembered at once; the least recently failing one is forgotten first. */
export const MAX_TRACKED_CLIENTS = 10_000;

/** Verdict of {@link CredentialFailureLimiter.check}. */
export type LimitVerdict = { limited: false } | { limited: true; retryAfterSeconds: number; failures: number };

/**
 * Sliding-window counter of credential failures per client key.
 *
 * @example
 * const limiter = new CredentialFailureLimiter();
 * limiter.recordFailure("203.0.113.7", Date.now());
 * limiter.check("203.0.113.7", Date.now()); // → { limited: false } until the 20th failure
 */
export class CredentialFailureLimiter {
  /** Failure times (ms) per client, oldest first, at most `limit` kept. Map order = recency. */
  private readonly failures = new Map<string, number[]>();

  constructor(
    private readonly limit = FAILURE_LIMIT,
    private readonly windowMs = FAILURE_WINDOW_MS,
    private readonly maxClients = MAX_TRACKED_CLIENTS,
  ) {}

  /** Whether `client` is over the limit at `nowMs`, and for how long. */
  check(client: string, nowMs: number): LimitVerdict {
    const times = this.live(client, nowMs);
    if (times.length < this.limit) return { limited: false };
    // The client becomes free when its oldest counted failure leaves the window.
    const retryAfterSeconds = Math.max(1, Math.ceil((times[0] + this.windowMs - nowMs) / 1000));
    return { limited: true, retryAfterSeconds, failures: times.length };
  }

  /** Counts one failed credential of `client` at `nowMs`. */
  recordFailure(client: string, nowMs: number): void {
    const times = this.live(client, nowMs);
    times.push(nowMs);
    // Only the last `limit` failures matter for the verdict: older ones leave the window first.
    if (times.length > this.limit) times.splice(0, times.length - this.limit);
    this.failures.delete(client);
    this.failures.set(client, times);
    if (this.failures.size > this.maxClients) {
      const oldest = this.failures.keys().next().value;
      if (oldest !== undefined) this.failures.delete(oldest);
    }
  }

  /** Number of clients currently remembered (for tests and health). */
  get trackedClients(): number {
    return this.failures.size;
  }

  /** The client's failures still inside the window (pruned in place). */
  private live(client: string, nowMs: number): number[] {
    const times = this.failures.get(client);
    if (!times) return [];
    let drop = 0;
    while (drop < times.length && times[drop] <= nowMs - this.windowMs) drop++;
    if (drop > 0) times.splice(0, drop);
    if (times.length === 0) this.failures.delete(client);
    return times;
  }
}

/**
 * The client key of a request: `cf-connecting-ip`, else "unidentified" (local tools that bypass the
 * edge; they share one bucket).
 */
export function clientKey(headers: Headers): string {
  const ip = headers.get("cf-connecting-ip")?.trim();
  return ip && ip.length <= 64 ? ip : "unidentified";
}

/** The isolate's limiter, shared by every route. */
export const credentialFailures = new CredentialFailureLimiter();
