/**
 * Personal data over time, on the real worker (workerd through Miniflare, real local D1 with the
 * migrations applied): the audit trail's hash chain (tampering found and named, erasure not taken
 * for tampering), erasure of one account everywhere (including an erasure racing decisions on the
 * same account), and the retention run (export first, batches, counts, a run cut short and the next
 * one carrying on).
 *
 * Review items are inserted straight into review_items (the trigger the queue consumer's inserts
 * fire makes their queue lines); claims and decisions go through the API, so their audit rows and
 * seals are the real ones. All data are invented.
 */
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import type { ChainReport, RetentionRun } from "../src/contract";
import { chainLink, eventDigest, type StoredEvent } from "../src/audit/audit-chain";
import type { ConflictMessage, ReviewMessage } from "../src/storage/messages";
import { RETENTION_BATCH } from "../src/retention/retention";
import { recordFromFields } from "../../shared-model/src";
import { SHOP_RECORD_SPEC, shopLedger } from "./record-fixtures";
import { countRows, eventually, makeTokens, startWorker, type D1Like, type RunningWorker } from "./harness";

const tokens = makeTokens();
const DAY = 86_400_000;
const MODEL = "m20260302-privacy01";
let worker: RunningWorker;
let db: D1Like;

beforeAll(async () => {
  // Shorter than the record spec's own 30 days, to show which one governs an account's history.
  worker = await startWorker({ tokens, vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0", RETENTION_DAYS: "7" } });
  db = await worker.db();
});
afterAll(async () => {
  await worker?.dispose();
});

/** Invented review items of one account, scored at `scoredAt`; returns their ids in order. */
async function plantItems(prefix: string, count: number, account: string | null, scoredAt = new Date().toISOString()): Promise<number[]> {
  const inserts = Array.from({ length: count }, (_, k) =>
    db
      .prepare(
        "INSERT INTO review_items (transaction_id, model_version, segment, account_ref, features_json, log_density, mahalanobis_sq, " +
          "tail_probability, cutoff_mahalanobis_sq, reasons_json, selection, inclusion_probability, scored_at, received_at) " +
          "VALUES (?1, ?2, 'web', ?3, ?4, -30, 40, 1e-6, 30, '[]', 'flagged', 1, ?5, ?5)",
      )
      .bind(`${prefix}-${k}`, MODEL, account, JSON.stringify({ amount: 100 + k, hourOfDay: 3 }), scoredAt),
  );
  for (let i = 0; i < inserts.length; i += 100) await db.batch(inserts.slice(i, i + 100));
  const { results } = await db.prepare("SELECT id FROM review_items WHERE transaction_id LIKE ?1 ORDER BY id").bind(`${prefix}-%`).all<{ id: number }>();
  expect(results).toHaveLength(count);
  return results.map((r) => r.id);
}

async function call<T>(method: string, path: string, body?: unknown, token = tokens.analyst): Promise<{ status: number; body: T }> {
  const response = await worker.fetch(path, {
    method,
    token,
    ...(body === undefined ? {} : { headers: { "content-type": "application/json" }, body: JSON.stringify(body) }),
  });
  return { status: response.status, body: (await response.json()) as T };
}

/** Claims and decides an item through the API, failing right here if either is refused. */
async function decide(id: number, outcome: "fraud" | "legitimate", note?: string): Promise<void> {
  const claim = await call("POST", `/v1/review/items/${id}/claim`, {});
  expect(claim.status, JSON.stringify(claim.body)).toBe(200);
  const decision = await call("POST", `/v1/review/items/${id}/decision`, note === undefined ? { outcome } : { outcome, note });
  expect(decision.status, JSON.stringify(decision.body)).toBe(200);
}

const verify = async () => {
  const answer = await call<ChainReport>("GET", "/v1/audit/verify", undefined, tokens.admin);
  expect(answer.status).toBe(200);
  return answer.body;
};

/** Runs a statement with one of the trail's guard triggers dropped (as someone tampering would), then puts it back. */
async function withoutTrigger(name: string, run: () => Promise<unknown>): Promise<void> {
  const saved = await db.prepare("SELECT sql FROM sqlite_master WHERE type = 'trigger' AND name = ?1").bind(name).first<{ sql: string }>();
  expect(saved).not.toBeNull();
  await db.prepare(`DROP TRIGGER ${name}`).run();
  try {
    await run();
  } finally {
    await db.prepare(saved!.sql).run();
  }
}

async function storedEvent(id: number): Promise<StoredEvent> {
  const row = await db.prepare("SELECT * FROM review_events WHERE id = ?1").bind(id).first<StoredEvent>();
  if (!row) throw new Error(`no event ${id}`);
  return row;
}

/** Every table's rows that mention `text` anywhere (the sweep behind "erased everywhere"). */
async function tablesMentioning(text: string): Promise<string[]> {
  const { results: tables } = await db
    .prepare("SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%' AND name NOT LIKE '_cf_%' AND name NOT LIKE 'd1_%'")
    .all<{
      name: string;
    }>();
  const found: string[] = [];
  for (const { name } of tables) {
    const { results } = await db.prepare(`SELECT * FROM "${name}"`).all();
    if (JSON.stringify(results).includes(text)) found.push(name);
  }
  return found;
}

describe("the audit trail's hash chain", () => {
  test("every action is sealed into the chain, and the chain verifies from the first event to the head", async () => {
    const [a, b] = await plantItems("tx-chain", 2, "acct-chain");
    await decide(a, "fraud", "two cards in ten minutes");
    await decide(b, "legitimate");
    const report = await verify();
    expect(report).toMatchObject({ ok: true, unsealed: 0, firstBroken: null });
    const last = await db.prepare("SELECT id, chain FROM review_events ORDER BY id DESC LIMIT 1").first<{ id: number; chain: string }>();
    expect(report.head).toEqual({ eventId: last!.id, chain: last!.chain });
    expect(report.events).toBe(last!.id);
    expect(await countRows(db, "review_events", "chain IS NULL")).toBe(0);
  });

  test("a note changed after the fact is found, and the verification names that event as changed", async () => {
    const target = (await db.prepare("SELECT id, note FROM review_events WHERE note IS NOT NULL ORDER BY id LIMIT 1").first<{ id: number; note: string }>())!;
    await expect(db.prepare("UPDATE review_events SET note = 'nothing unusual' WHERE id = ?1").bind(target.id).run()).rejects.toThrow(/append-only/);
    await withoutTrigger("review_events_no_update", async () => {
      await db.prepare("UPDATE review_events SET note = 'nothing unusual' WHERE id = ?1").bind(target.id).run();
      const report = await verify();
      expect(report.ok).toBe(false);
      expect(report.firstBroken).toMatchObject({ eventId: target.id, kind: "content-changed" });
      expect(report.head?.eventId).toBe(target.id - 1);
      await db.prepare("UPDATE review_events SET note = ?2 WHERE id = ?1").bind(target.id, target.note).run();
    });
    expect((await verify()).ok).toBe(true);
  });

  test("a changed event whose digests were recomputed breaks the link of the event after it", async () => {
    const target = (await db.prepare("SELECT id FROM review_events WHERE note IS NOT NULL ORDER BY id LIMIT 1").first<{ id: number }>())!;
    const original = await storedEvent(target.id);
    const previous = await storedEvent(target.id - 1);
    const forged = { ...original, to_outcome: "legitimate", note: "looked fine" };
    const digest = await eventDigest(forged);
    const chain = await chainLink(previous.chain!, digest);
    await withoutTrigger("review_events_no_update", async () => {
      await db
        .prepare("UPDATE review_events SET to_outcome = ?2, note = ?3, digest = ?4, chain = ?5 WHERE id = ?1")
        .bind(target.id, forged.to_outcome, forged.note, digest, chain)
        .run();
      const report = await verify();
      expect(report.firstBroken).toMatchObject({ eventId: target.id + 1, kind: "link-broken" });
      await db
        .prepare("UPDATE review_events SET to_outcome = ?2, note = ?3, digest = ?4, chain = ?5 WHERE id = ?1")
        .bind(target.id, original.to_outcome, original.note, original.digest, original.chain)
        .run();
    });
    expect((await verify()).ok).toBe(true);
  });

  test("a deleted event is found: the verification names the missing events and where the trail resumes", async () => {
    const victim = await storedEvent(2);
    await expect(db.prepare("DELETE FROM review_events WHERE id = 2").run()).rejects.toThrow(/append-only/);
    await withoutTrigger("review_events_no_delete", async () => {
      await db.prepare("DELETE FROM review_events WHERE id = 2").run();
      const report = await verify();
      expect(report.firstBroken).toMatchObject({ eventId: 3, kind: "events-missing" });
      expect(report.firstBroken?.explanation).toContain("events 2 to 2 are missing");
      const columns = Object.keys(victim);
      await db
        .prepare(`INSERT INTO review_events (${columns.join(", ")}) VALUES (${columns.map((_, i) => `?${i + 1}`).join(", ")})`)
        .bind(...columns.map((c) => victim[c as keyof StoredEvent]))
        .run();
    });
    expect((await verify()).ok).toBe(true);
  });

  test("an event's content cannot be erased before it is sealed, and a sealed one only to a tombstone that keeps its digests", async () => {
    const id = (await db.prepare("SELECT id FROM review_events ORDER BY id LIMIT 1").first<{ id: number }>())!.id;
    // Keeping the content but marking it erased, or changing the digest on the way, is refused.
    await expect(db.prepare("UPDATE review_events SET erased_at = '2026-12-04T00:00:00Z', erased_by = 'erasure' WHERE id = ?1").bind(id).run()).rejects.toThrow();
    await expect(
      db
        .prepare(
          "UPDATE review_events SET item_id = NULL, actor = NULL, note = NULL, from_outcome = NULL, to_outcome = NULL, model_version = NULL, " +
            "erased_at = '2026-12-04T00:00:00Z', erased_by = 'erasure', digest = 'x' WHERE id = ?1",
        )
        .bind(id)
        .run(),
    ).rejects.toThrow(/append-only/);
    expect((await verify()).ok).toBe(true);
  });
});

describe("erasing one account", () => {
  test("an admin erases an account everywhere: items, notes, audit content, conflicts, shadow scores; the log keeps counts and a digest", async () => {
    const account = "acct-erase-7d41";
    const [decided, claimed] = await plantItems("tx-erase", 3, account);
    const [other] = await plantItems("tx-keep", 1, "acct-keep-5c02");
    await decide(decided, "fraud", "card tested with small amounts first");
    expect((await call("POST", `/v1/review/items/${claimed}/claim`, {})).status).toBe(200);
    await decide(other, "legitimate", "regular customer");
    await db.batch([
      db
        .prepare(
          "INSERT INTO payment_conflicts (transaction_id, first_seen_at, at, first_content_hash, content_hash, model_version, segment, account_ref, features_json) " +
            "VALUES ('tx-erase-0', ?1, ?1, 'a', 'b', ?2, 'web', ?3, '{}')",
        )
        .bind(new Date().toISOString(), MODEL, account),
      db
        .prepare(
          "INSERT INTO shadow_scores (transaction_id, live_version, shadow_version, live_segment, shadow_segment, live_flagged, shadow_flagged, " +
            "live_mahalanobis_sq, shadow_mahalanobis_sq, live_tail_probability, shadow_tail_probability, scored_at) VALUES ('tx-erase-1', ?1, 'm-shadow', 'web', 'web', 1, 0, 40, 20, 1e-6, 0.01, ?2)",
        )
        .bind(MODEL, new Date().toISOString()),
    ]);
    const eventsBefore = await countRows(db, "review_events", `item_id IN (SELECT id FROM review_items WHERE account_ref = '${account}')`);
    expect(eventsBefore).toBe(3);

    expect((await call("DELETE", `/v1/accounts/${account}`, undefined, tokens.analyst)).status).toBe(403);
    const erased = await call<{ eventId: number; erased: Record<string, Record<string, number>>; outsideIsodense?: string }>(
      "DELETE",
      `/v1/accounts/${account}`,
      undefined,
      tokens.admin,
    );
    expect(erased.status).toBe(200);
    expect(erased.body.erased["review-store"]).toEqual({ items: 3, notes: 1, auditEvents: 3, paymentConflicts: 1, shadowScores: 1, labelsInFinishedExports: 0 });
    expect(erased.body.erased["account-history"]).toEqual({ keptPayments: 0, foldedPayments: 0 });
    expect(erased.body.outsideIsodense).toBeUndefined();

    // Nothing of the account is left in any table, the erasure log included (it keeps a digest).
    expect(await tablesMentioning(account)).toEqual([]);
    expect(await tablesMentioning("tx-erase-")).toEqual([]);
    expect(await tablesMentioning("small amounts")).toEqual([]);
    expect(await countRows(db, "review_events", "erased_by = 'erasure'")).toBe(3);
    const log = await db
      .prepare("SELECT actor, outcome, detail FROM erasure_events WHERE id = ?1")
      .bind(erased.body.eventId)
      .first<{ actor: string; outcome: string; detail: string }>();
    expect(log).toMatchObject({ actor: "ops-ana", outcome: "done" });
    expect(JSON.parse(log!.detail).erased["review-store"].items).toBe(3);
    // The other account is untouched, and erasure is not mistaken for tampering.
    expect(await countRows(db, "review_items", "account_ref = 'acct-keep-5c02'")).toBe(1);
    const report = await verify();
    expect(report).toMatchObject({ ok: true, firstBroken: null });
    expect(report.tombstones).toBeGreaterThanOrEqual(3);

    // Asking again erases nothing more and says so with zero counts.
    const again = await call<{ erased: Record<string, Record<string, number>> }>("DELETE", `/v1/accounts/${account}`, undefined, tokens.admin);
    expect(again.body.erased["review-store"].items).toBe(0);
  });

  test("an erasure racing decisions on the same account leaves no item half-erased and nothing resurrected", async () => {
    // Three rounds, the erasure sent before, amid and after the decisions, so the race meets them at different points.
    for (const [round, erasureAt] of [0, 6, 12].entries()) {
      const account = `acct-race-91b3-${round}`;
      const ids = await plantItems(`tx-race-${round}`, 12, account);
      for (const id of ids) expect((await call("POST", `/v1/review/items/${id}/claim`, {})).status).toBe(200);
      const requests: Promise<{ status: number; body: unknown }>[] = ids.map((id) =>
        call("POST", `/v1/review/items/${id}/decision`, { outcome: "fraud", note: `race note ${id}` }),
      );
      requests.splice(erasureAt, 0, call("DELETE", `/v1/accounts/${account}`, undefined, tokens.admin));
      const answers = await Promise.all(requests);
      const erasure = answers[erasureAt] as { status: number; body: { erased: Record<string, Record<string, number>> } };
      const decisions = answers.filter((_, i) => i !== erasureAt);
      expect(erasure.status).toBe(200);
      // Each decision landed before the erasure (200) or found no item (404): never anything else.
      for (const d of decisions) expect([200, 404], JSON.stringify(d.body)).toContain(d.status);
      const landed = decisions.filter((d) => d.status === 200).length;
      const store = erasure.body.erased["review-store"];
      expect(store.items).toBe(12);
      // Claims plus the decisions that landed: every one of them erased, none left with content.
      expect(store.auditEvents).toBe(12 + landed);
      expect(store.notes).toBe(landed);
      expect(await tablesMentioning(account)).toEqual([]);
      expect(await tablesMentioning(`tx-race-${round}-`)).toEqual([]);
      expect(await countRows(db, "review_events", `item_id IN (${ids.join(",")})`)).toBe(0);
      // Nothing comes back: the items answer 404 and a late claim or decision writes no audit row.
      const events = await countRows(db, "review_events");
      expect((await call("POST", `/v1/review/items/${ids[0]}/claim`, {})).status).toBe(404);
      expect((await call("POST", `/v1/review/items/${ids[1]}/decision`, { outcome: "legitimate" })).status).toBe(404);
      expect(await countRows(db, "review_events")).toBe(events);
    }
    expect(await tablesMentioning("race note")).toEqual([]);
    expect((await verify()).ok).toBe(true);
  });

  test("a flag or conflict scored before the erasure but delivered after it is not written back; a flag scored after it is", async () => {
    const account = "acct-late-5d10";
    await plantItems("tx-late-seed", 1, account);
    const before = new Date(Date.now() - 60_000).toISOString();
    expect((await call("DELETE", `/v1/accounts/${account}`, undefined, tokens.admin)).status).toBe(200);
    const after = new Date(Date.now() + 1_000).toISOString();
    const flag = (transactionId: string, scoredAt: string): ReviewMessage => ({
      kind: "review",
      transactionId,
      modelVersion: MODEL,
      segment: "web",
      accountRef: account,
      features: { amount: 812 },
      logDensity: -30,
      mahalanobisSq: 40,
      tailProbability: 1e-6,
      cutoffMahalanobisSq: 30,
      reasons: [],
      selection: "flagged",
      inclusionProbability: 1,
      scoredAt,
    });
    const conflict: ConflictMessage = {
      kind: "conflict",
      transactionId: "tx-late-conflict",
      firstSeenAt: before,
      at: before,
      firstContentHash: "a",
      contentHash: "b",
      modelVersion: MODEL,
      segment: "web",
      accountRef: account,
      features: { amount: 813 },
    };
    const queue = await worker.mf.getQueueProducer<ReviewMessage | ConflictMessage>("FLAGS");
    await queue.sendBatch([{ body: flag("tx-late-before", before) }, { body: conflict }, { body: flag("tx-late-after", after) }]);
    await eventually(async () => ((await countRows(db, "review_items", "transaction_id = 'tx-late-after'")) === 1 ? true : undefined), 15_000);
    expect(await countRows(db, "review_items", "transaction_id = 'tx-late-before'")).toBe(0);
    expect(await countRows(db, "payment_conflicts", "transaction_id = 'tx-late-conflict'")).toBe(0);
  });

  test("labels that already left in a finished export are counted and the answer says they must be erased where they are", async () => {
    const account = "acct-exported-2a77";
    const [id] = await plantItems("tx-exported", 1, account);
    await decide(id, "fraud");
    // Decided more than the commit margin before the export started.
    await db.prepare("UPDATE review_status SET decided_ms = decided_ms - 600000 WHERE item_id = ?1").bind(id).run();
    const response = await worker.fetch("/v1/review/export?format=csv", { token: tokens.analyst });
    expect(response.headers.get("x-isodense-export-id")).toMatch(/^\d+$/);
    expect(await response.text()).toContain("tx-exported-0");
    const erased = await call<{ erased: Record<string, Record<string, number>>; outsideIsodense?: string }>("DELETE", `/v1/accounts/${account}`, undefined, tokens.admin);
    expect(erased.body.erased["review-store"].labelsInFinishedExports).toBe(1);
    expect(erased.body.outsideIsodense).toContain("1 of the account's labels were in label exports taken before this erasure");
  });
});

describe("an account's history under the retention setting", () => {
  test("is kept no longer than RETENTION_DAYS after the account's last payment, although the record spec would keep it 30 days", async () => {
    expect(SHOP_RECORD_SPEC.retentionMs).toBe(30 * DAY);
    const [row] = shopLedger({ accounts: 1, payments: 1, startMs: Date.now() - DAY, days: 1, seed: 5 });
    const stub = await worker.history(String(row.accountRef));
    const [result] = await stub.deriveAndRecord("spec-retention", SHOP_RECORD_SPEC, [recordFromFields(SHOP_RECORD_SPEC, row)]);
    expect(result.ok).toBe(true);
    const footprint = await stub.footprint();
    expect(footprint.keptPayments).toBe(1);
    const keptFor = footprint.alarmAtMs! - footprint.lastActivityMs!;
    expect(keptFor).toBeLessThanOrEqual(7 * DAY);
    expect(keptFor).toBeGreaterThan(7 * DAY - 60_000);
  });
});

describe("retention", () => {
  // A fresh store: the exports taken above would hold the items backdated below.
  beforeAll(async () => {
    await worker.dispose();
    worker = await startWorker({ tokens, vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0", RETENTION_DAYS: "30" } });
    db = await worker.db();
  });
  const run = async () => {
    const answer = await call<RetentionRun>("POST", "/v1/retention/run", {}, tokens.admin);
    expect(answer.status, JSON.stringify(answer.body)).toBe(200);
    return answer.body;
  };
  const old = (days: number) => Date.now() - days * DAY;

  test("keeps decided items past the retention until a finished export holds them, says why, then deletes them with notes and audit content", async () => {
    const ids = await plantItems("tx-old", 3, "acct-old-33f0", new Date(old(50)).toISOString());
    const [recent] = await plantItems("tx-recent", 1, "acct-recent-0b9e");
    const [undecided] = await plantItems("tx-open-old", 1, "acct-open-41aa", new Date(old(50)).toISOString());
    for (const id of [...ids, recent]) await decide(id, "fraud", `note of ${id}`);
    await db
      .prepare(`UPDATE review_status SET decided_ms = ?1 WHERE item_id IN (${ids.join(",")})`)
      .bind(old(40))
      .run();
    await db.batch([
      db
        .prepare(
          "INSERT INTO payment_conflicts (transaction_id, first_seen_at, at, first_content_hash, content_hash, model_version, segment, account_ref, features_json) " +
            "VALUES ('tx-old-conflict', ?1, ?1, 'a', 'b', ?2, 'web', 'acct-old-33f0', '{}')",
        )
        .bind(new Date(old(45)).toISOString(), MODEL),
      db
        .prepare(
          "INSERT INTO shadow_scores (transaction_id, live_version, shadow_version, live_segment, shadow_segment, live_flagged, shadow_flagged, " +
            "live_mahalanobis_sq, shadow_mahalanobis_sq, live_tail_probability, shadow_tail_probability, scored_at) VALUES ('tx-old-shadow', ?1, 'm-shadow', 'web', 'web', 1, 0, 40, 20, 1e-6, 0.01, ?2)",
        )
        .bind(MODEL, new Date(old(45)).toISOString()),
    ]);

    const first = await run();
    expect(first.status).toBe("done");
    expect(first.deleted).toEqual({ items: 0, notes: 0, auditEvents: 0, paymentConflicts: 1, shadowScores: 1 });
    expect(first.keptUnexported).toBe(3);
    expect(first.detail && "reason" in first.detail ? first.detail.reason : "").toMatch(
      /3 decided item\(s\) older than 30 days are kept because no finished label export holds them/,
    );
    expect(await countRows(db, "review_items", "transaction_id LIKE 'tx-old-%'")).toBe(3);

    // An export of another model version does not hold these labels.
    expect(await (await worker.fetch("/v1/review/export?format=ndjson&modelVersion=m-other", { token: tokens.analyst })).text()).toBe("");
    expect((await run()).keptUnexported).toBe(3);

    const exported = await worker.fetch("/v1/review/export?format=ndjson", { token: tokens.analyst });
    expect((await exported.text()).split("\n").filter((l) => l.includes("tx-old-")).length).toBe(3);
    const second = await run();
    expect(second.deleted).toMatchObject({ items: 3, notes: 3, auditEvents: 6 });
    expect(second.keptUnexported).toBe(0);
    expect(second.detail).toBeNull();
    expect(await tablesMentioning("acct-old-33f0")).toEqual([]);
    expect(await countRows(db, "review_items", `id IN (${recent}, ${undecided})`)).toBe(2);
    expect((await verify()).ok).toBe(true);

    const third = await run();
    expect(third.deleted).toEqual({ items: 0, notes: 0, auditEvents: 0, paymentConflicts: 0, shadowScores: 0 });
    const listed = await call<{ runs: RetentionRun[] }>("GET", "/v1/retention/runs", undefined, tokens.admin);
    expect(listed.body.runs.slice(0, 3).map((r) => r.id)).toEqual([third.id, second.id, second.id - 1]);
  });

  test("deletes in batches; a run cut short mid-way loses nothing and the next run carries on, the counts adding up exactly", async () => {
    const count = 2 * RETENTION_BATCH + 50;
    const ids = await plantItems("tx-bulk", count, "acct-bulk-6e12", new Date(old(60)).toISOString());
    await db
      .prepare(`UPDATE review_status SET decided = 1, outcome = 'legitimate', note = 'bulk', decided_by = 'rosa', decided_ms = ?1 WHERE item_id BETWEEN ?2 AND ?3`)
      .bind(old(59), ids[0], ids[count - 1])
      .run();
    expect((await worker.fetch("/v1/review/export?format=csv", { token: tokens.analyst }).then((r) => r.text())).length).toBeGreaterThan(0);
    // The second batch stops at its last statement, as if the worker died there.
    const stopAt = ids[RETENTION_BATCH + 10];
    await db.prepare(`CREATE TRIGGER stop_retention BEFORE DELETE ON review_items WHEN OLD.id = ${stopAt} BEGIN SELECT RAISE(ABORT, 'stopped mid-way'); END`).run();
    const cut = await call<{ error: string }>("POST", "/v1/retention/run", {}, tokens.admin);
    expect(cut.status).toBe(503);
    const failed = (await call<{ runs: RetentionRun[] }>("GET", "/v1/retention/runs", undefined, tokens.admin)).body.runs[0];
    expect(failed.status).toBe("failed");
    expect(failed.deleted.items).toBe(RETENTION_BATCH);
    expect(failed.deleted.notes).toBe(RETENTION_BATCH);
    // The failed batch changed nothing: its items, queue lines and notes are all still there.
    expect(await countRows(db, "review_items", "transaction_id LIKE 'tx-bulk-%'")).toBe(count - RETENTION_BATCH);
    expect(await countRows(db, "review_status", "transaction_id LIKE 'tx-bulk-%' AND note = 'bulk'")).toBe(count - RETENTION_BATCH);
    expect(await countRows(db, "privacy_batch")).toBe(0);

    await db.prepare("DROP TRIGGER stop_retention").run();
    const next = await run();
    expect(next.status).toBe("done");
    expect(next.deleted.items).toBe(count - RETENTION_BATCH);
    expect(failed.deleted.items + next.deleted.items).toBe(count);
    expect(await countRows(db, "review_items", "transaction_id LIKE 'tx-bulk-%'")).toBe(0);
    expect((await verify()).ok).toBe(true);
  });

  test("a run found still running long after it started is marked interrupted by the next", async () => {
    await db
      .prepare("INSERT INTO retention_runs (started_at, run_by, retention_days, cutoff_at) VALUES (?1, 'cron', 30, ?1)")
      .bind(new Date(Date.now() - 2 * 3_600_000).toISOString())
      .run();
    await run();
    expect(await countRows(db, "retention_runs", "status = 'running'")).toBe(0);
    expect(await countRows(db, "retention_runs", "status = 'interrupted'")).toBe(1);
  });

  test("the weekly cron runs retention and logs the audit chain's head", async () => {
    const before = await countRows(db, "retention_runs");
    const fetcher = await worker.mf.getWorker();
    await fetcher.scheduled({ cron: "0 4 * * 1", scheduledTime: new Date() });
    // The run and the check go on in waitUntil: wait for the run to finish and the head to be logged.
    await eventually(async () => ((await countRows(db, "retention_runs", "run_by = '0 4 * * 1' AND status = 'done'")) === 1 ? true : undefined), 15_000);
    expect(await countRows(db, "retention_runs")).toBe(before + 1);
    await eventually(async () => (worker.logs.some((l) => l.message.includes('"event":"audit-chain-head"')) ? true : undefined), 15_000);
  });
});
