/**
 * The fault matrix, on the real worker (workerd through Miniflare, real local KV/D1/Queues).
 *
 * | fault | where it is tested |
 * | --- | --- |
 * | KV unreadable, a model cached: the cached model keeps serving | models.test.ts › "KV failures with a cached model" |
 * | KV unreadable, nothing cached: 503 no-model | models.test.ts › "KV failures without a cached model" |
 * | active pointer naming a missing (or tampered) version | models.test.ts › both KV suites |
 * | D1 unavailable during the queue consumer: retries, dead-letter, zero loss, counted in the logs | handoff.test.ts › "D1 failure" |
 * | D1 unavailable during a review decision: clear 503, no half-written audit row | here |
 * | a claim that expires while the decision is on its way | here |
 * | concurrent decisions on one item: exactly one wins | here |
 * | worker restart mid-replay: no duplicate review items, none lost after the resend | here |
 * | account history (Durable Object) failing or not answering: 503 retryable within HISTORY_TIMEOUT_MS; ready features unaffected | here |
 *
 * Simultaneous claims (exactly one wins) and a claim that has expired before the decision are in
 * review.test.ts › "claims".
 */
import { mkdtemp, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import type { ActionResult, AuditEvent, ItemDetail } from "../../src/contract";
import { fitShopModel, scoreBody, shopPayments, UNUSUAL_PAYMENT } from "../fixtures";
import { fitRecordModel, shopLedger } from "../record-fixtures";
import { countRows, deadLetterBacklog, eventually, makeTokens, publishModel, queueDelivered, startWorker, type D1Like, type RunningWorker } from "../harness";

interface Refusal {
  error: string;
  problems: { field: string; rule: string }[];
  retryable?: boolean;
}

describe("review decisions under faults", () => {
  const tokens = makeTokens();
  const idrisToken = `test-idris-${"5c1e".repeat(8)}`;
  let worker: RunningWorker;
  let db: D1Like;
  let scored = 0;

  beforeAll(async () => {
    worker = await startWorker({
      tokens,
      vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0" },
      secrets: { ANALYST_CREDENTIALS: `rosa:${tokens.analyst},idris:${idrisToken}` },
    });
    db = await worker.db();
    await publishModel(worker, await fitShopModel({ version: "mfault-review" }));
  });
  afterAll(async () => {
    await worker?.dispose();
  });

  /** Flags `count` unusual payments the real way and returns their item ids. */
  async function flag(count: number): Promise<number[]> {
    const ids: string[] = [];
    for (let k = 0; k < count; k++) {
      const transactionId = `tx-fault-${++scored}`;
      const response = await worker.post("/v1/score", { transactionId, features: { ...UNUSUAL_PAYMENT, amount: 2100 + 13 * scored }, segment: "web" }, tokens.flow);
      expect(response.status).toBe(200);
      ids.push(transactionId);
    }
    return eventually(async () => {
      const { results } = await db
        .prepare(`SELECT id, transaction_id FROM review_items WHERE transaction_id IN (${ids.map((_, i) => `?${i + 1}`).join(",")})`)
        .bind(...ids)
        .all<{ id: number; transaction_id: string }>();
      return results.length === ids.length ? ids.map((t) => results.find((r) => r.transaction_id === t)!.id) : undefined;
    }, 15_000);
  }

  const post = async <T>(path: string, body: unknown = {}, token = tokens.analyst) => {
    const response = await worker.post(path, body, token);
    return { status: response.status, body: (await response.json()) as T, headers: response.headers };
  };
  const eventsOf = async (id: number): Promise<AuditEvent[]> => {
    const response = await worker.fetch(`/v1/review/items/${id}`, { token: tokens.analyst });
    return ((await response.json()) as ItemDetail).events.slice().reverse();
  };

  test("D1 failing during a decision answers a clear retryable 503 and writes neither the decision nor its audit row", async () => {
    const [id] = await flag(1);
    expect((await post(`/v1/review/items/${id}/claim`)).status).toBe(200);
    const statusBefore = await db.prepare("SELECT * FROM review_status WHERE item_id = ?1").bind(id).first();
    // The audit table goes away: the batch (audit insert + state update) cannot commit.
    await db.exec("ALTER TABLE review_events RENAME TO review_events_away");
    let failed: { status: number; body: Refusal; headers: Headers };
    try {
      failed = await post<Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud", note: "during the outage" });
    } finally {
      await db.exec("ALTER TABLE review_events_away RENAME TO review_events");
    }
    expect(failed.status).toBe(503);
    expect(failed.body.error).toBe("review-store-unavailable");
    expect(failed.body.retryable).toBe(true);
    expect(failed.headers.get("retry-after")).toBe("2");
    expect(failed.body.problems).toEqual([{ field: "id", rule: `item ${id} was not changed: the review store could not be written; nothing was recorded, try again` }]);
    // Nothing half-written: the standing is untouched (still claimed by rosa) and the trail holds only the claim.
    expect(await db.prepare("SELECT * FROM review_status WHERE item_id = ?1").bind(id).first()).toEqual(statusBefore);
    expect((await eventsOf(id)).map((e) => e.action)).toEqual(["claim"]);
    // After recovery the same decision goes through, once.
    const retried = await post<ActionResult>(`/v1/review/items/${id}/decision`, { outcome: "fraud", note: "during the outage" });
    expect(retried.status).toBe(200);
    expect((await eventsOf(id)).map((e) => e.action)).toEqual(["claim", "decide"]);
    expect(worker.logs.some((l) => l.message.includes('"event":"review-store-unavailable"'))).toBe(true);
  });

  test("a claim that runs out while the decision is on its way: the decision and the new claim never both count", async () => {
    const ids = await flag(12);
    for (const [k, id] of ids.entries()) {
      expect((await post(`/v1/review/items/${id}/claim`)).status).toBe(200);
      // The claim ends a few milliseconds from now, while rosa's decision and idris's claim race.
      await db
        .prepare("UPDATE review_status SET claim_expires_ms = ?2 WHERE item_id = ?1")
        .bind(id, Date.now() + (k % 4) * 3)
        .run();
      const [decision, claim] = await Promise.all([
        post<ActionResult & Refusal>(`/v1/review/items/${id}/decision`, { outcome: "legitimate" }),
        post<ActionResult & Refusal>(`/v1/review/items/${id}/claim`, {}, idrisToken),
      ]);
      const trail = await eventsOf(id);
      const decides = trail.filter((e) => e.action === "decide");
      const final = (await (await worker.fetch(`/v1/review/items/${id}`, { token: tokens.analyst })).json()) as ItemDetail;
      if (decision.status === 200) {
        // Decided in time: exactly one decision row, by rosa, and the item is decided.
        expect(decides.map((e) => e.actor)).toEqual(["rosa"]);
        expect(final.item.decision).toMatchObject({ outcome: "legitimate", by: "rosa" });
      } else {
        // Too late: refused as claim-required (her claim ran out) or claimed-by-another, with no decision row.
        expect(decision.status).toBe(409);
        expect(["claim-required", "claimed-by-another"]).toContain(decision.body.error);
        expect(decides).toEqual([]);
        expect(final.item.decision).toBeNull();
      }
      // idris either took it (a claim row by idris) or was told who holds it; never both holders.
      if (claim.status === 200) expect(trail.some((e) => e.action === "claim" && e.actor === "idris")).toBe(true);
      else expect(claim.status).toBe(409);
      expect(trail.filter((e) => e.action === "claim" && e.actor === "idris")).toHaveLength(claim.status === 200 ? 1 : 0);
    }
  });

  test("two decisions on one item at the same moment: exactly one wins, one audit row", async () => {
    const ids = await flag(6);
    for (const id of ids) {
      expect((await post(`/v1/review/items/${id}/claim`)).status).toBe(200);
      const answers = await Promise.all([
        post<ActionResult & Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud" }),
        post<ActionResult & Refusal>(`/v1/review/items/${id}/decision`, { outcome: "legitimate" }),
        post<ActionResult & Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud" }, idrisToken),
      ]);
      const winners = answers.filter((a) => a.status === 200);
      expect(winners).toHaveLength(1);
      for (const loser of answers.filter((a) => a.status !== 200)) {
        expect(loser.status).toBe(409);
        expect(loser.body.problems[0].field).toBe("id");
      }
      const decides = (await eventsOf(id)).filter((e) => e.action === "decide");
      expect(decides).toHaveLength(1);
      const final = (await (await worker.fetch(`/v1/review/items/${id}`, { token: tokens.analyst })).json()) as ItemDetail;
      expect(final.item.decision?.outcome).toBe(decides[0].toOutcome);
    }
  });
});

describe("worker restart mid-replay", () => {
  test("a replay cut off by a restart and sent again in full stores every flag exactly once", { timeout: 120_000 }, async () => {
    const dir = await mkdtemp(join(tmpdir(), "isodense-restart-"));
    const tokens = makeTokens();
    const vars = { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0.05" };
    // Unusual payments among typical ones, 25 per batch call, as scripts/replay.ts sends them.
    const payments = [
      ...Array.from({ length: 40 }, (_, i) => ({ transactionId: `rp-u${i}`, features: { ...UNUSUAL_PAYMENT, amount: 1500 + 17 * i }, segment: "web" })),
      ...shopPayments(160, 41).map((p, i) => scoreBody(`rp-t${i}`, p)),
    ].sort((a, b) => String(a.transactionId).localeCompare(String(b.transactionId)));
    const batches: (typeof payments)[] = [];
    for (let i = 0; i < payments.length; i += 25) batches.push(payments.slice(i, i + 25));

    const reviewIds = new Set<string>();
    async function send(worker: RunningWorker, list: typeof batches): Promise<void> {
      for (const batch of list) {
        const response = await worker.post("/v1/score/batch", { payments: batch }, tokens.flow);
        expect(response.status).toBe(200);
        const body = (await response.json()) as { results: { outcome: string; result: { transactionId: string; decision: string; auditSample: boolean } }[] };
        for (const r of body.results) {
          expect(r.outcome).toBe("scored");
          if (r.result.decision === "review" || r.result.auditSample) reviewIds.add(r.result.transactionId);
        }
      }
    }

    let first: RunningWorker | undefined = await startWorker({ persistDir: dir, tokens, vars });
    let second: RunningWorker | undefined;
    try {
      await publishModel(first, await fitShopModel({ version: "mfault-replay" }));
      // Half the replay, then the process goes away at once: whatever the local queue still held
      // in memory is lost with it (production queues are durable; the resend covers both).
      await send(first, batches.slice(0, Math.ceil(batches.length / 2)));
      await first.dispose();
      first = undefined;

      second = await startWorker({ persistDir: dir, tokens, vars, skipMigrations: true });
      const db = await second.db();
      const storedAfterCut = await countRows(db, "review_items");
      expect(storedAfterCut).toBeLessThanOrEqual(reviewIds.size);
      await send(second, batches);
      expect(reviewIds.size).toBeGreaterThanOrEqual(40);
      await eventually(async () => ((await countRows(db, "review_items")) >= reviewIds.size ? true : undefined), 30_000, 300);
      // Look for duplicates once every copy sent again has been delivered: the main queue has
      // delivered everything sent before a marker, and the dead-letter queue owes nothing.
      await queueDelivered(second, "restart-drained-marker");
      const logs = second.logs;
      await eventually(async () => (deadLetterBacklog(logs, "isodense-flags-dead") === 0 ? true : undefined), 30_000, 300);
      const { results } = await db
        .prepare("SELECT transaction_id, COUNT(*) AS n FROM review_items WHERE transaction_id LIKE 'rp-%' GROUP BY transaction_id, model_version")
        .all<{ transaction_id: string; n: number }>();
      expect(results.map((r) => r.transaction_id).sort()).toEqual([...reviewIds].sort());
      expect(results.filter((r) => r.n !== 1)).toEqual([]);
      // One queue line per item as well (the trigger builds review_status from review_items).
      expect(await countRows(db, "review_status", "transaction_id LIKE 'rp-%'")).toBe(reviewIds.size);
    } finally {
      await first?.dispose();
      await second?.dispose();
      await rm(dir, { recursive: true, force: true });
    }
  });
});

/**
 * Stands in for the account-history Durable Object: throws for account "acct-failing" (a store
 * that fails), and takes 30 s for any other (a store that does not answer in time). No test waits
 * for those 30 s: the worker gives up after HISTORY_TIMEOUT_MS (200 ms here); 30 s only has to be
 * far longer than that, so that the answer can only come from the timeout.
 */
const FAULTY_HISTORY = `
import { DurableObject } from "cloudflare:workers";
export class AccountHistoryObject extends DurableObject {
  async deriveAndRecord(specKey, spec, records) {
    if (records[0].account === "acct-failing") throw new Error("history store failing (fault injection)");
    await new Promise((resolve) => setTimeout(resolve, 30000));
    return [];
  }
  async erase() {
    await new Promise((resolve) => setTimeout(resolve, 30000));
  }
}
export default { fetch: () => new Response("history stand-in") };
`;

describe("account history failing or not answering", () => {
  let worker: RunningWorker;
  const payment = (account: string) => ({ createdAt: "2026-04-01T10:00:00Z", accountRef: account, channel: "web", amount: 30, accountCreatedAt: "2026-01-01T00:00:00Z" });

  beforeAll(async () => {
    worker = await startWorker({
      vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0", PAYMENT_CLOCK_TOLERANCE_SECONDS: "0", HISTORY_TIMEOUT_MS: "200" },
      historyStandIn: FAULTY_HISTORY,
    });
    await publishModel(worker, await fitRecordModel(shopLedger({ accounts: 40, payments: 1200, startMs: Date.UTC(2026, 2, 1), days: 20, seed: 17 }), "mfault-history"));
  });
  afterAll(async () => {
    await worker?.dispose();
  });

  test("a failing or silent history store answers 503 retryable within the timeout, naming the account's history", async () => {
    for (const account of ["acct-failing", "acct-silent"]) {
      const started = Date.now();
      const response = await worker.post("/v1/score", { transactionId: `h-${account}`, payment: payment(account) }, worker.tokens.flow);
      const elapsed = Date.now() - started;
      expect(response.status).toBe(503);
      expect(response.headers.get("retry-after")).toBe("1");
      const body = (await response.json()) as Refusal;
      expect(body.error).toBe("history-unavailable");
      expect(body.retryable).toBe(true);
      expect(body.problems[0].field).toBe("payment");
      expect(body.problems[0].rule).toContain(`the history of account "${account}" could not be read in time (HISTORY_TIMEOUT_MS 200)`);
      // Bounded: far below the stand-in's 30 s (the bound itself is HISTORY_TIMEOUT_MS).
      expect(elapsed).toBeLessThan(10_000);
    }
    expect(worker.logs.some((l) => l.message.includes('"event":"history-unavailable"'))).toBe(true);
  });

  test("in a batch only the payment records are refused; ready features are scored as before", async () => {
    const response = await worker.post(
      "/v1/score/batch",
      {
        payments: [
          { transactionId: "hb-1", payment: payment("acct-failing") },
          {
            transactionId: "hb-2",
            features: { amount: 30, paymentsLast24h: 0, hoursSincePrevious: 5, amountVsAccountAverage: 1, accountAgeDays: 90, hourOfDay: 10 },
            segment: "web",
          },
        ],
      },
      worker.tokens.flow,
    );
    expect(response.status).toBe(200);
    const body = (await response.json()) as { results: { outcome: string; status?: number; error?: string; retryable?: boolean }[] };
    expect(body.results[0]).toMatchObject({ outcome: "refused", status: 503, error: "history-unavailable", retryable: true });
    expect(body.results[1].outcome).toBe("scored");
  });

  test("an erasure the history store does not confirm answers 503 and is logged as failed", async () => {
    const response = await worker.fetch("/v1/accounts/acct-silent/history", { method: "DELETE", token: worker.tokens.admin });
    expect(response.status).toBe(503);
    expect(((await response.json()) as Refusal).error).toBe("history-unavailable");
    const row = await (await worker.db()).prepare("SELECT outcome, detail FROM erasure_events ORDER BY id DESC LIMIT 1").first<{ outcome: string; detail: string }>();
    expect(row?.outcome).toBe("failed");
    expect(JSON.parse(row!.detail)).toMatchObject({ failedScope: "account-history" });
  });
});
