/**
 * The review audit trail as a hash chain (migration 0011): tamper-evident, yet erasable.
 *
 * Each event gets `digest` = SHA-256 of its content and `chain` = SHA-256 of the previous event's
 * chain, a newline and its own digest (the first event links to {@link GENESIS}). An erased event
 * (a tombstone) keeps its digests but not its content, so the chain still verifies across it; a
 * changed event no longer matches its digest, and a removed, inserted or re-linked one breaks the
 * link of the event after it. {@link verifyAuditTrail} walks the chain and names the first break.
 *
 * Events are written inside the D1 batch that changes the review line (review/actions.ts), where
 * no hash can be computed (D1 has no SHA-256 function); {@link sealAuditTrail} seals them right
 * after, in id order. Two sealers racing compute the same digests from the same predecessor (one
 * statement reads the last sealed event and those after it), so either write is the same.
 *
 * What the chain cannot show on its own: someone with write access to D1 who rewrites every
 * event from some point on and recomputes all the links. Keep the head (`head.chain`, logged by
 * every cron run) outside D1 too; a later head that does not extend it is the evidence.
 */
import { sha256Hex } from "../../../shared-model/src";
import type { BrokenLink, ChainReport } from "../contract/privacy";
import type { Env } from "../env";

/** The `chain` value the first event links to: 64 zeros. */
export const GENESIS = "0".repeat(64);

/** Events read per page while sealing or verifying. */
const PAGE = 500;

/** An event's stored columns (content, digests, tombstone marks). */
export interface StoredEvent {
  id: number;
  item_id: number | null;
  at: string;
  actor: string | null;
  action: string;
  from_outcome: string | null;
  to_outcome: string | null;
  note: string | null;
  model_version: string | null;
  digest: string | null;
  chain: string | null;
  erased_at: string | null;
  erased_by: string | null;
}

const EVENT_READ = "id, item_id, at, actor, action, from_outcome, to_outcome, note, model_version, digest, chain, erased_at, erased_by";

/**
 * SHA-256 of an event's content, as canonical JSON of its fields in a fixed order.
 *
 * @example
 * await eventDigest({ id: 1, item_id: 7, at: "2026-12-04T10:00:00.000Z", actor: "rosa", action: "claim", from_outcome: null, to_outcome: null, note: null, model_version: "m1" })
 */
export function eventDigest(event: Pick<StoredEvent, "id" | "item_id" | "at" | "actor" | "action" | "from_outcome" | "to_outcome" | "note" | "model_version">): Promise<string> {
  return sha256Hex(JSON.stringify([event.id, event.item_id, event.at, event.actor, event.action, event.from_outcome, event.to_outcome, event.note, event.model_version]));
}

/**
 * The chain value of an event: SHA-256 of the previous chain value, a newline and its digest.
 *
 * @example await chainLink(GENESIS, digest)
 */
export function chainLink(previousChain: string, digest: string): Promise<string> {
  return sha256Hex(`${previousChain}\n${digest}`);
}

/** Running state of a walk along the chain: the last event checked and its chain value. */
export interface ChainCursor {
  id: number;
  chain: string;
}

/**
 * Checks one page of events (in id order) against the cursor; returns the new cursor, or the
 * first break. Pure: the verify route and the unit tests share it.
 *
 * @param cursor the last verified event, or null at the start of the trail.
 */
export async function checkEvents(
  cursor: ChainCursor | null,
  events: readonly StoredEvent[],
): Promise<{ cursor: ChainCursor | null; broken: BrokenLink | null; tombstones: number }> {
  let tombstones = 0;
  let current = cursor;
  for (const event of events) {
    if (event.chain === null) break;
    const previousId = current?.id ?? 0;
    if (event.id !== previousId + 1) {
      return {
        cursor: current,
        tombstones,
        broken: {
          eventId: event.id,
          kind: "events-missing",
          explanation: `events ${previousId + 1} to ${event.id - 1} are missing: they were deleted (erasure keeps a tombstone, so this is not erasure)`,
        },
      };
    }
    if (event.erased_at !== null) tombstones += 1;
    if (event.digest === null) {
      return { cursor: current, tombstones, broken: { eventId: event.id, kind: "tombstone-without-digest", explanation: "the event has a chain value but no digest" } };
    }
    if (event.erased_at === null && (await eventDigest(event)) !== event.digest) {
      return {
        cursor: current,
        tombstones,
        broken: { eventId: event.id, kind: "content-changed", explanation: "the event's content no longer matches its digest: it was changed after it was written" },
      };
    }
    if ((await chainLink(current?.chain ?? GENESIS, event.digest)) !== event.chain) {
      return {
        cursor: current,
        tombstones,
        broken: {
          eventId: event.id,
          kind: "link-broken",
          explanation: `the event does not link to event ${previousId}${previousId === 0 ? " (the start)" : ""}: an event before it, or its digests, were changed, removed or inserted`,
        },
      };
    }
    current = { id: event.id, chain: event.chain };
  }
  return { cursor: current, tombstones, broken: null };
}

/**
 * Seals every event written since the last seal, in id order, a page at a time.
 *
 * @returns how many events this call sealed.
 * @example await sealAuditTrail(env)
 */
export async function sealAuditTrail(env: Pick<Env, "DB">): Promise<number> {
  let sealed = 0;
  for (;;) {
    // One statement, one snapshot: the last sealed event and the unsealed ones after it.
    const { results } = await env.DB.prepare(
      `SELECT ${EVENT_READ} FROM review_events WHERE id >= coalesce((SELECT id FROM review_events WHERE chain IS NOT NULL ORDER BY id DESC LIMIT 1), 0) ORDER BY id LIMIT ?1`,
    )
      .bind(PAGE + 1)
      .all<StoredEvent>();
    let previous = results[0]?.chain ?? GENESIS;
    const pending = results.filter((e) => e.chain === null);
    if (pending.length === 0) return sealed;
    const updates: D1PreparedStatement[] = [];
    for (const event of pending) {
      const digest = await eventDigest(event);
      const chain = await chainLink(previous, digest);
      updates.push(env.DB.prepare("UPDATE review_events SET digest = ?2, chain = ?3 WHERE id = ?1 AND chain IS NULL").bind(event.id, digest, chain));
      previous = chain;
    }
    await env.DB.batch(updates);
    sealed += pending.length;
    if (results.length <= PAGE) return sealed;
  }
}

/**
 * Seals what is pending, then walks the whole trail from the first event and reports the first
 * break, if any. Reads every event once, a page at a time.
 *
 * @example const report = await verifyAuditTrail(env); if (!report.ok) console.error(report.firstBroken);
 */
export async function verifyAuditTrail(env: Pick<Env, "DB">): Promise<ChainReport> {
  await sealAuditTrail(env);
  let cursor: ChainCursor | null = null;
  let events = 0;
  let tombstones = 0;
  let unsealed = 0;
  let after = 0;
  for (;;) {
    const { results } = await env.DB.prepare(`SELECT ${EVENT_READ} FROM review_events WHERE id > ?1 ORDER BY id LIMIT ?2`).bind(after, PAGE).all<StoredEvent>();
    if (results.length === 0) break;
    const checked = await checkEvents(cursor, results);
    tombstones += checked.tombstones;
    if (checked.broken) {
      const verified = checked.cursor;
      return {
        ok: false,
        events: events + results.findIndex((e) => e.id === checked.broken!.eventId),
        tombstones,
        unsealed,
        head: verified && { eventId: verified.id, chain: verified.chain },
        firstBroken: checked.broken,
      };
    }
    const firstUnsealed = results.findIndex((e) => e.chain === null);
    if (firstUnsealed >= 0) {
      // Written after the seal above: fine at the end of the trail, a break anywhere before a sealed one.
      const rest = await env.DB.prepare("SELECT id FROM review_events WHERE id > ?1 AND chain IS NOT NULL ORDER BY id LIMIT 1")
        .bind(results[firstUnsealed].id)
        .first<{ id: number }>();
      if (rest) {
        const broken: BrokenLink = {
          eventId: results[firstUnsealed].id,
          kind: "unsealed-before-sealed",
          explanation: `the event has no digests although event ${rest.id} after it is sealed: its digests were removed`,
        };
        return { ok: false, events: events + firstUnsealed, tombstones, unsealed, head: cursor && { eventId: cursor.id, chain: cursor.chain }, firstBroken: broken };
      }
      unsealed = (await env.DB.prepare("SELECT COUNT(*) AS n FROM review_events WHERE id >= ?1").bind(results[firstUnsealed].id).first<{ n: number }>())?.n ?? 0;
      events += firstUnsealed;
      cursor = checked.cursor;
      break;
    }
    events += results.length;
    cursor = checked.cursor;
    after = results[results.length - 1].id;
  }
  return { ok: true, events, tombstones, unsealed, head: cursor && { eventId: cursor.id, chain: cursor.chain }, firstBroken: null };
}

/**
 * The cron's check: verifies the chain and logs the head (to keep outside D1) or the first break.
 * Never throws.
 *
 * @example ctx.waitUntil(checkAuditChain(env));
 */
export async function checkAuditChain(env: Pick<Env, "DB">): Promise<void> {
  try {
    const report = await verifyAuditTrail(env);
    const event = report.ok ? "audit-chain-head" : "audit-chain-broken";
    (report.ok ? console.log : console.error)(JSON.stringify({ event, head: report.head, events: report.events, tombstones: report.tombstones, firstBroken: report.firstBroken }));
  } catch (error) {
    console.error(JSON.stringify({ event: "audit-chain-check-failed", error: String(error) }));
  }
}
