/**
 * The shadow comparison: on live traffic scored by both models so far, each model's flag rate,
 * how often they agree, and how much their flags overlap — the evidence for promoting a shadow.
 */
import type { Env } from "../env";
import type { ShadowComparison } from "./contract";
export type { ShadowComparison };

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
