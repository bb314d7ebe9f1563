/**
 * Rate limiting of credential failures, per client address, in the isolate's memory.
 *
 * A client address (`cf-connecting-ip`, which Cloudflare sets on every request and a caller cannot
 * forge past the edge; IPv6 counted per /64, see {@link clientKey}) that presents
 * {@link FAILURE_LIMIT} wrong or malformed credentials within {@link FAILURE_WINDOW_MS} has every
 * further wrong or malformed credential answered 429 with `Retry-After`, until the oldest of those
 * failures leaves the window (a sliding window over the failure times). Requests without an
 * Authorization header are not counted: they reveal nothing.
 *
 * **A valid credential is never refused because of failures from its address.** Many callers can
 * share one address (a NAT, a proxy, the payment flow's egress next to a replica still holding a
 * rotated-out token), so limiting the address as a whole would let anyone who shares it turn the
 * payment flow's scoring into 429s. The presented token is therefore always checked; only
 * credentials that fail are refused with 429 while the address is limited. Guessing is not what
 * this stops: tokens carry ≥ 128 bits. It keeps a misconfigured or hostile client from filling the
 * logs and tells it clearly to stop.
 *
 * Why in-isolate only: each isolate counts on its own, so a client spread over k isolates gets
 * k × FAILURE_LIMIT tries per window; a KV counter would not tighten that usefully (KV is eventually
 * consistent and allows one write per key per second) and would put a KV write on the failure path.
 * docs/reliability.md says where a platform rate-limiting rule fits instead.
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
 * The client key of a request: the IPv4 address from `cf-connecting-ip`, or the /64 prefix of an
 * IPv6 address (one subscriber usually holds a whole /64, so counting single IPv6 addresses would let
 * one client rotate through 2^64 of them); else "unidentified" (local tools that bypass the edge;
 * they share one bucket).
 *
 * @example
 * clientKey(new Headers({ "cf-connecting-ip": "2001:db8:1:2:aa::1" })) // → "2001:db8:1:2::/64"
 * clientKey(new Headers({ "cf-connecting-ip": "::ffff:203.0.113.7" })) // → "203.0.113.7"
 */
export function clientKey(headers: Headers): string {
  const ip = headers.get("cf-connecting-ip")?.trim();
  if (!ip || ip.length > 64) return "unidentified";
  if (!ip.includes(":")) return ip;
  return ipv6Bucket(ip) ?? "unidentified";
}

/** The /64 of an IPv6 address as `a:b:c:d::/64` (lower-case, no leading zeros); an IPv4-mapped address as its IPv4 form; null when malformed. */
function ipv6Bucket(text: string): string | null {
  const address = text.replace(/%.*$/, "").toLowerCase(); // a zone id (`%eth0`) names no other host
  const mapped = /^::ffff:(\d{1,3}(?:\.\d{1,3}){3})$/.exec(address);
  if (mapped) return mapped[1];
  const halves = address.split("::");
  if (halves.length > 2) return null;
  const parse = (part: string) => (part === "" ? [] : part.split(":"));
  const head = parse(halves[0]);
  const tail = halves.length === 2 ? parse(halves[1]) : [];
  // A dotted IPv4 ending counts as two groups.
  const last = halves.length === 2 ? tail : head;
  const dotted = last.length > 0 && last[last.length - 1].includes(".") ? 1 : 0;
  const missing = 8 - head.length - tail.length - dotted;
  if (halves.length === 1 ? missing !== 0 : missing < 1) return null;
  const full = [...head, ...new Array<string>(halves.length === 2 ? missing : 0).fill("0"), ...tail];
  const prefix = full.slice(0, 4);
  if (!prefix.every((g) => /^[0-9a-f]{1,4}$/.test(g))) return null;
  return `${prefix.map((g) => parseInt(g, 16).toString(16)).join(":")}::/64`;
}

/** The isolate's limiter, shared by every route. */
export const credentialFailures = new CredentialFailureLimiter();
