/**
 * The shadow comparison: on live traffic scored by both models so far, each model's flag rate,
 * how often they agree, and how much their flags overlap — the evidence for promoting a shadow.
 */
import type { Env } from "../env";
import type { Disagreement, ShadowComparison } from "../contract";
export type { Disagreement, ShadowComparison };

/**
 * Reads the comparison of `shadowVersion` against `liveVersion` from `shadow_scores`.
 *
 * @example
 * await shadowComparison(env, "m20261201-1f3a9c2e", "m20261208-77ab01cd") // { payments: 5120, agreement: 0.996, … }
 */
export async function shadowComparison(env: Pick<Env, "DB">, liveVersion: string, shadowVersion: string): Promise<ShadowComparison> {
  const { results } = await env.DB.prepare(
    `SELECT substr(scored_at, 1, 10) AS day, COUNT(*) AS n, SUM(live_flagged) AS lf, SUM(shadow_flagged) AS sf,
            SUM(live_flagged * shadow_flagged) AS bf, MIN(scored_at) AS first, MAX(scored_at) AS last
     FROM shadow_scores WHERE live_version = ?1 AND shadow_version = ?2 GROUP BY day ORDER BY day`,
  )
    .bind(liveVersion, shadowVersion)
    .all<{ day: string; n: number; lf: number; sf: number; bf: number; first: string; last: string }>();
  const days = results.map((r) => ({ day: r.day, payments: Number(r.n), liveFlags: Number(r.lf), shadowFlags: Number(r.sf), bothFlags: Number(r.bf) }));
  const sum = (pick: (d: (typeof days)[number]) => number) => days.reduce((a, d) => a + pick(d), 0);
  const payments = sum((d) => d.payments);
  const liveFlags = sum((d) => d.liveFlags);
  const shadowFlags = sum((d) => d.shadowFlags);
  const bothFlags = sum((d) => d.bothFlags);
  const either = liveFlags + shadowFlags - bothFlags;
  return {
    liveVersion,
    shadowVersion,
    payments,
    liveFlags,
    shadowFlags,
    bothFlags,
    liveFlagRate: payments > 0 ? liveFlags / payments : null,
    shadowFlagRate: payments > 0 ? shadowFlags / payments : null,
    // Disagreements are the flags of exactly one model: (live − both) + (shadow − both).
    agreement: payments > 0 ? (payments - (liveFlags - bothFlags) - (shadowFlags - bothFlags)) / payments : null,
    flagOverlap: either > 0 ? bothFlags / either : null,
    firstScoredAt: results.length > 0 ? results.map((r) => r.first).sort()[0] : null,
    lastScoredAt:
      results.length > 0
        ? results
            .map((r) => r.last)
            .sort()
            .at(-1)!
        : null,
    days,
  };
}

/** Disagreements the model page lists. */
export const DISAGREEMENTS_SHOWN = 20;

/**
 * The latest payments that exactly one of the two models flagged, newest first: the cases a
 * person reads before promoting the shadow.
 */
export async function shadowDisagreements(env: Pick<Env, "DB">, liveVersion: string, shadowVersion: string): Promise<Disagreement[]> {
  const { results } = await env.DB.prepare(
    `SELECT transaction_id, scored_at, live_flagged, shadow_flagged, live_mahalanobis_sq, shadow_mahalanobis_sq FROM shadow_scores
     WHERE live_version = ?1 AND shadow_version = ?2 AND live_flagged <> shadow_flagged ORDER BY scored_at DESC, id DESC LIMIT ?3`,
  )
    .bind(liveVersion, shadowVersion, DISAGREEMENTS_SHOWN)
    .all<{ transaction_id: string; scored_at: string; live_flagged: number; shadow_flagged: number; live_mahalanobis_sq: number; shadow_mahalanobis_sq: number }>();
  return results.map((r) => ({
    transactionId: r.transaction_id,
    scoredAt: r.scored_at,
    liveFlagged: r.live_flagged === 1,
    shadowFlagged: r.shadow_flagged === 1,
    liveMahalanobisSq: r.live_mahalanobis_sq,
    shadowMahalanobisSq: r.shadow_mahalanobis_sq,
  }));
}

/**
 * When `shadowVersion` last became the shadow (its latest applied shadow-set event), or null when
 * no event records it.
 */
export async function shadowSetAt(env: Pick<Env, "DB">, shadowVersion: string): Promise<string | null> {
  const row = await env.DB.prepare("SELECT at FROM model_events WHERE action = 'shadow-set' AND outcome = 'applied' AND to_version = ?1 ORDER BY id DESC LIMIT 1")
    .bind(shadowVersion)
    .first<{ at: string }>();
  return row?.at ?? null;
}
