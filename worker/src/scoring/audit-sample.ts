/**
 * Audit sample: a small, known fraction of the payments that pass is also sent to review, so that
 * prevalence and recall can later be estimated without the bias of reviewing flags only. Each
 * reviewed audit label is weighted by 1 / inclusion probability (Horvitz & Thompson 1952).
 *
 * The draw is a deterministic function of the transaction id, not a random number: the same
 * payment scored twice is drawn (or not) both times, which keeps the answer idempotent, and a
 * later analysis can recompute exactly which payments were eligible.
 */

const TWO_POW_20 = 2 ** 20;
const TWO_POW_52 = 2 ** 52;

/**
 * Position of a transaction id in [0, 1): the first 52 bits of SHA-256(UTF-8 id) divided by 2^52.
 * 52 bits fit a double exactly, so every value is a multiple of 2^-52 and the map is uniform to
 * within SHA-256's own uniformity.
 *
 * @example
 * await auditPosition("pay-000123") // → 0.7305…, the same on every call and every machine
 */
export async function auditPosition(transactionId: string): Promise<number> {
  const digest = new Uint8Array(await crypto.subtle.digest("SHA-256", new TextEncoder().encode(transactionId)));
  // High 32 bits, then the next 20 (bytes 4, 5 and the top nibble of byte 6).
  const high = ((digest[0] << 24) | (digest[1] << 16) | (digest[2] << 8) | digest[3]) >>> 0;
  const low = (digest[4] << 12) | (digest[5] << 4) | (digest[6] >>> 4);
  return (high * TWO_POW_20 + low) / TWO_POW_52;
}

/**
 * Whether a passing payment at `position` belongs to the audit sample drawn at `rate`:
 * position < rate, so P(selected) = rate exactly for a uniform position.
 *
 * @param rate inclusion probability in [0, 1] (AUDIT_SAMPLE_RATE).
 * @example
 * isAudited(0.0013, 0.002) // → true
 */
export function isAudited(position: number, rate: number): boolean {
  return position < rate;
}
