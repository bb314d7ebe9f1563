/**
 * Durable idempotency on the real worker (workerd through Miniflare, SQLite-backed Durable Objects,
 * real local D1 and Queues): a transaction id names one payment on every isolate for the
 * idempotency window. "Another isolate" is a second Miniflare on the same persisted state, as
 * after a restart or on another machine: nothing of the first one's memory survives but what is
 * stored. Before the durable store, the repeat with other features was answered 200 there.
 */
import { mkdtemp, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import type { ItemDetail } from "../../src/contract";
import type { ScoreAnswer } from "../../src/contract";
import { fitShopModel, UNUSUAL_PAYMENT, shopPayments } from "../fixtures";
import { countRows, eventually, makeTokens, publishModel, startWorker, type RunningWorker } from "../harness";

const tokens = makeTokens();
let dir: string;
let first: RunningWorker;
let second: RunningWorker | undefined;

const vars = { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0" };

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-idempotency-"));
  first = await startWorker({ tokens, vars, persistDir: dir });
  await publishModel(first, await fitShopModel({ version: "m20260302-idem01" }));
});

afterAll(async () => {
  if (!second) await first?.dispose();
  await second?.dispose();
  await rm(dir, { recursive: true, force: true });
});

async function score(worker: RunningWorker, body: unknown): Promise<{ status: number; body: Record<string, unknown> }> {
  const res = await worker.post("/v1/score", body, tokens.flow);
  return { status: res.status, body: (await res.json()) as Record<string, unknown> };
}

/** Stops the first worker and starts another on its persisted state (KV, D1, Durable Objects). */
async function restart(): Promise<RunningWorker> {
  await first.dispose();
  second = await startWorker({ tokens, vars, persistDir: dir, skipMigrations: true });
  return second;
}

const flagged = { transactionId: "idem-flagged", features: UNUSUAL_PAYMENT, segment: "web", accountRef: "acct-idem-1" };
const passing = { transactionId: "idem-passing", features: shopPayments(1, 3)[0].features, segment: "app" };
let flaggedAnswer: ScoreAnswer;
let passingAnswer: ScoreAnswer;

describe("a transaction id names one payment on every isolate", () => {
  it("answers a flagged and a passing payment on the first isolate and stores the flag", async () => {
    const a = await score(first, flagged);
    const b = await score(first, passing);
    expect([a.status, b.status]).toEqual([200, 200]);
    flaggedAnswer = a.body as unknown as ScoreAnswer;
    passingAnswer = b.body as unknown as ScoreAnswer;
    expect(flaggedAnswer.decision).toBe("review");
    expect(passingAnswer.decision).toBe("pass");
    const db = await first.db();
    await eventually(async () => ((await countRows(db, "review_items", "transaction_id = ?1", flagged.transactionId)) === 1 ? true : undefined), 15_000);
  });

  it("refuses the same ids with other content on another isolate with 409, and records the conflict for the analysts", async () => {
    const worker = await restart();
    const changed = await score(worker, { ...flagged, features: { ...UNUSUAL_PAYMENT, amount: 12.5 } });
    expect(changed.status).toBe(409);
    expect(changed.body.error).toBe("conflict");
    const problem = (changed.body.problems as { field: string; rule: string }[])[0];
    expect(problem.field).toBe("transactionId");
    expect(problem.rule).toMatch(/^"idem-flagged" was first seen at \d{4}-\d\d-\d\dT[\d:.]+Z with different features, segment or accountRef/);
    // A passing payment was never in the review store; its conflicting repeat is refused all the same.
    expect((await score(worker, { ...passing, segment: "web" })).status).toBe(409);
    expect((await score(worker, { ...passing, accountRef: "acct-other" })).status).toBe(409);

    const db = await worker.db();
    const rows = await eventually(async () => {
      const { results } = await db.prepare("SELECT transaction_id, features_json, segment FROM payment_conflicts ORDER BY id").all<Record<string, string>>();
      return results.length === 3 ? results : undefined;
    }, 15_000);
    expect(rows.map((r) => r.transaction_id)).toEqual(["idem-flagged", "idem-passing", "idem-passing"]);
    expect(JSON.parse(rows[0].features_json).amount).toBe(12.5);
    // The review store keeps the first, flagged version, and its payment view shows the conflict.
    const item = await db
      .prepare("SELECT id, features_json FROM review_items WHERE transaction_id = ?1")
      .bind(flagged.transactionId)
      .first<{ id: number; features_json: string }>();
    expect(JSON.parse(item!.features_json).amount).toBe(UNUSUAL_PAYMENT.amount);
    const detail = (await (await worker.fetch(`/v1/review/items/${item!.id}`, { token: tokens.analyst })).json()) as ItemDetail;
    expect(detail.conflicts).toHaveLength(1);
    expect(detail.conflicts[0]).toMatchObject({ features: { amount: 12.5 }, segment: "web", accountRef: "acct-idem-1" });
  });

  it("answers a repeat with the same content on another isolate with the stored answer, even under a newer model", async () => {
    const worker = second!;
    await publishModel(worker, await fitShopModel({ version: "m20260302-idem02", seed: 12 }));
    const again = await score(worker, flagged);
    expect(again.status).toBe(200);
    expect(again.body).toEqual(flaggedAnswer);
    expect((await score(worker, passing)).body).toEqual(passingAnswer);
    // The batch route shares the store: the same ids inside a batch get the same outcomes.
    const res = await worker.post("/v1/score/batch", { payments: [passing, { ...flagged, segment: "app" }] }, tokens.flow);
    const batch = (await res.json()) as { results: { outcome: string; status?: number; result?: ScoreAnswer }[] };
    expect(batch.results[0]).toMatchObject({ outcome: "scored", result: passingAnswer });
    expect(batch.results[1]).toMatchObject({ outcome: "refused", status: 409 });
    const db = await worker.db();
    await eventually(async () => ((await countRows(db, "payment_conflicts")) === 4 ? true : undefined), 15_000);
    expect(await countRows(db, "review_items", "transaction_id = ?1", flagged.transactionId)).toBe(1);
  });
});

describe("the idempotency window", () => {
  const WINDOW_SECONDS = 5;
  let short: RunningWorker;
  beforeAll(async () => {
    // 5 s, not 1 s: the repeat must surely arrive inside the window even on a loaded machine (two
    // requests can take over a second there), and the test then waits out the window measured from
    // the first answer, so neither half depends on how fast the machine is.
    short = await startWorker({ tokens, vars: { ...vars, IDEMPOTENCY_WINDOW_SECONDS: String(WINDOW_SECONDS) } });
    await publishModel(short, await fitShopModel({ version: "m20260302-idem03" }));
  });
  afterAll(async () => {
    await short?.dispose();
  });

  it("forgets an id once the window has passed, so the id may name a new payment", async () => {
    const body = { transactionId: "idem-window", features: UNUSUAL_PAYMENT, segment: "web" };
    expect((await score(short, body)).status).toBe(200);
    // The id was first seen no later than this moment, so the window ends no later than it plus the window.
    const firstAnswered = Date.now();
    expect((await score(short, { ...body, segment: "app" })).status).toBe(409);
    await new Promise((r) => setTimeout(r, Math.max(0, firstAnswered + WINDOW_SECONDS * 1000 + 100 - Date.now())));
    expect((await score(short, { ...body, segment: "app" })).status).toBe(200);
  });

  it("refuses a malformed window with a 500 naming the variable", async () => {
    const bad = await startWorker({ tokens, vars: { ...vars, IDEMPOTENCY_WINDOW_SECONDS: "a day" } });
    try {
      const res = await bad.post("/v1/score", { transactionId: "x", features: UNUSUAL_PAYMENT }, tokens.flow);
      expect(res.status).toBe(500);
      expect(await res.text()).toContain("IDEMPOTENCY_WINDOW_SECONDS");
    } finally {
      await bad.dispose();
    }
  });
});
