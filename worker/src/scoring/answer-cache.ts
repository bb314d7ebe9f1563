/**
 * Bounded in-isolate memory of recent answers, keyed by (model version, transaction id), so that a
 * payment sent again returns the identical answer without a second hand-off, and a payment sent
 * again with different content is refused (409) instead of silently re-scored.
 *
 * Scope: one isolate. Another isolate (or this one after eviction or restart) does not remember;
 * there a repeat is scored afresh, which gives the same answer because scoring is a pure function
 * of (model version, body), and the review store keeps one row per (transaction, model version).
 * A conflicting repeat that lands elsewhere is therefore answered, not refused, and the store keeps
 * the first body. docs/worker.md states this limit.
 */

/** What is remembered for one payment. */
export interface RememberedAnswer<T> {
  /** SHA-256 (hex) of the payment's content, see {@link contentHash}. */
  bodyHash: string;
  answer: T;
}

/** Default capacity: answers are ~1–2 KB, so 5,000 stay far inside a 128 MB isolate. */
export const DEFAULT_ANSWER_CACHE_SIZE = 5000;

/**
 * Least-recently-used map with a fixed capacity (a `Map` keeps insertion order; a hit re-inserts).
 *
 * @example
 * const cache = new AnswerCache<string>(2);
 * cache.set("a", { bodyHash: "h", answer: "x" });
 * cache.get("a")?.answer // → "x"
 */
export class AnswerCache<T> {
  private readonly entries = new Map<string, RememberedAnswer<T>>();
  constructor(readonly capacity: number = DEFAULT_ANSWER_CACHE_SIZE) {
    if (!Number.isInteger(capacity) || capacity < 1) throw new RangeError(`capacity must be a positive integer. Actual: ${capacity}`);
  }

  /** Entries currently held. */
  get size(): number {
    return this.entries.size;
  }

  /** The remembered answer, refreshed as most recently used; undefined if not held. */
  get(key: string): RememberedAnswer<T> | undefined {
    const entry = this.entries.get(key);
    if (entry === undefined) return undefined;
    this.entries.delete(key);
    this.entries.set(key, entry);
    return entry;
  }

  /** Remembers an answer, evicting the least recently used entry when full. */
  set(key: string, entry: RememberedAnswer<T>): void {
    this.entries.delete(key);
    this.entries.set(key, entry);
    if (this.entries.size > this.capacity) {
      const oldest = this.entries.keys().next().value as string;
      this.entries.delete(oldest);
    }
  }
}

/** Cache key of a payment under a model version. */
export function answerKey(modelVersion: string, transactionId: string): string {
  return `${modelVersion}\u0000${transactionId}`;
}

/**
 * SHA-256 (hex) of what determines a payment's answer besides its id: the features (keys sorted,
 * so key order does not matter), the segment and the account reference.
 *
 * @example
 * await contentHash({ amount: 1, items: 2 }, "web", null) === await contentHash({ items: 2, amount: 1 }, "web", null) // → true
 */
export async function contentHash(
  features: Readonly<Record<string, number>>,
  segment: string | null,
  accountRef: string | null,
): Promise<string> {
  const names = Object.keys(features).sort();
  const text = JSON.stringify([names.map((name) => [name, features[name]]), segment, accountRef]);
  const digest = new Uint8Array(await crypto.subtle.digest("SHA-256", new TextEncoder().encode(text)));
  let hex = "";
  for (const byte of digest) hex += byte.toString(16).padStart(2, "0");
  return hex;
}
