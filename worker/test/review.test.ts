/**
 * The review API in process (./in-process.ts: the app with real local D1, KV and Queues,
 * migrations applied): claims and their races, expiry, decisions with their audit rows, undo, paging and
 * filters, the payment view's evidence, the labelled-set export read back with the CLI's own CSV
 * and ledger readers, role checks and bad input.
 *
 * Payments are invented (worker/test/fixtures.ts). Flags that need evidence arrive the real way:
 * scored through POST /v1/score and written to D1 by the queue consumer. The paging suite inserts
 * its rows straight into review_items, which fires the same trigger the consumer's inserts fire.
 */
import { mkdtemp, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { parseCsvChunks, numberCell } from "../../cli/csv";
import { openLedger } from "../../cli/ledger";
import type { AccountDecision, AccountFlags, ActionResult, AuditEvent, DaySummary, ItemDetail, QueuePage, QueueRow, StateCounts, WhoAmI } from "../src/contract";
import { buildCountQuery, buildPageQuery } from "../src/review/queue-store";
import { fitShopModel, SHOP_FEATURES, shopPayments, UNUSUAL_PAYMENT } from "./fixtures";
import { countRows, eventually, makeTokens, type D1Like, type RunningWorker } from "./harness";
import { startApp } from "./in-process";

const tokens = makeTokens();
/** A second analyst for the races. */
const idrisToken = `test-idris-${"7f3a".repeat(8)}`;
let worker: RunningWorker;
let db: D1Like;
let modelVersion: string;

beforeAll(async () => {
  worker = await startApp({
    tokens,
    vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0", ANALYST_DAILY_CAPACITY: "120" },
    secrets: { ANALYST_CREDENTIALS: `rosa:${tokens.analyst},idris:${idrisToken}` },
  });
  db = await worker.db();
  const artifact = await fitShopModel({ version: "m20260302-review01" });
  modelVersion = artifact.version;
  expect((await worker.post("/v1/models", artifact, tokens.admin)).status).toBe(201);
  expect((await worker.post(`/v1/models/${modelVersion}/activate`, {}, tokens.admin)).status).toBe(200);
});

afterAll(async () => {
  await worker?.dispose();
});

const get = async <T>(path: string, token: string | null = tokens.analyst): Promise<{ status: number; body: T }> => {
  const res = await worker.fetch(path, { token });
  return { status: res.status, body: (await res.json()) as T };
};
const post = async <T>(path: string, body: unknown = {}, token: string | null = tokens.analyst): Promise<{ status: number; body: T }> => {
  const res = await worker.post(path, body, token);
  return { status: res.status, body: (await res.json()) as T };
};
/**
 * A step a test builds on (a claim, a decision): fails right here with the worker's answer when it
 * is not the expected status, rather than at a later assertion far from the cause.
 */
const step = async <T = ActionResult>(path: string, body: unknown = {}, token: string | null = tokens.analyst, expected = 200): Promise<T> => {
  const res = await post<T>(path, body, token);
  expect(res.status, `POST ${path} answered ${res.status}: ${JSON.stringify(res.body)}`).toBe(expected);
  return res.body;
};

interface Refusal {
  error: string;
  problems: { field: string; rule: string }[];
  claim?: { by: string; until: string };
}

let scored = 0;
/**
 * Scores unusual payments through POST /v1/score and waits for the consumer to store them.
 * Returns their item ids in the order given.
 */
async function flagPayments(count: number, accountRef: string | null = null): Promise<number[]> {
  const ids: string[] = [];
  for (let k = 0; k < count; k++) {
    const transactionId = `tx-review-${++scored}`;
    const features = { ...UNUSUAL_PAYMENT, amount: UNUSUAL_PAYMENT.amount + 37 * scored };
    const body: Record<string, unknown> = { transactionId, features, segment: "web" };
    if (accountRef) body.accountRef = accountRef;
    const res = await worker.post("/v1/score", body, tokens.flow);
    expect(res.status).toBe(200);
    expect(((await res.json()) as { decision: string }).decision).toBe("review");
    ids.push(transactionId);
  }
  return eventually(async () => {
    const { results } = await db
      .prepare(`SELECT id, transaction_id FROM review_items WHERE transaction_id IN (${ids.map((_, i) => `?${i + 1}`).join(",")})`)
      .bind(...ids)
      .all<{ id: number; transaction_id: string }>();
    if (results.length < ids.length) return undefined;
    return ids.map((t) => results.find((r) => r.transaction_id === t)!.id);
  }, 15_000);
}

/** The item's audit trail in the order it happened (the API serves it newest first). */
async function events(id: number): Promise<AuditEvent[]> {
  return (await get<ItemDetail>(`/v1/review/items/${id}`)).body.events.slice().reverse();
}

describe("who is signed in and who may call", () => {
  it("tells an analyst their name, role, the claim length and the undo window", async () => {
    const { status, body } = await get<WhoAmI>("/v1/review/me");
    expect(status).toBe(200);
    expect(body).toEqual({ user: "rosa", role: "analyst", claimTtlSeconds: 900, undoWindowSeconds: 300 });
    expect((await get<WhoAmI>("/v1/review/me", tokens.admin)).body.role).toBe("admin");
  });

  it("refuses a missing or unknown credential with 401 and the payment flow's credential with 403", async () => {
    const none = await get<Refusal>("/v1/review/items", null);
    expect(none.status).toBe(401);
    expect(none.body.problems[0].field).toBe("authorization");
    expect((await get<Refusal>("/v1/review/items", "not-a-known-token-at-all-0000")).status).toBe(401);
    for (const [method, path] of [
      ["GET", "/v1/review/items"],
      ["GET", "/v1/review/export?format=csv"],
      ["POST", "/v1/review/items/1/claim"],
    ] as const) {
      const res = method === "GET" ? await get<Refusal>(path, tokens.flow) : await post<Refusal>(path, {}, tokens.flow);
      expect(res.status, `${method} ${path}`).toBe(403);
      expect(res.body.error).toBe("forbidden");
      expect(res.body.problems[0].rule).toContain("role flow may not call");
    }
  });

  it("lets an admin work the queue like an analyst", async () => {
    const [id] = await flagPayments(1);
    const claimed = await post<ActionResult>(`/v1/review/items/${id}/claim`, {}, tokens.admin);
    expect(claimed.status).toBe(200);
    expect(claimed.body.item.claim?.by).toBe("ops-ana");
    expect((await post<ActionResult>(`/v1/review/items/${id}/release`, {}, tokens.admin)).status).toBe(200);
  });
});

describe("the payment view", () => {
  it("shows the stored reasons, every feature's residual, the pair plot's Gaussian and the account's other flags", async () => {
    const [first, second, third] = await flagPayments(3, "acct-ember-204");
    const { status, body } = await get<ItemDetail>(`/v1/review/items/${third}`);
    expect(status).toBe(200);
    expect(body.item.transactionId).toMatch(/^tx-review-/);
    expect(body.item.modelVersion).toBe(modelVersion);
    expect(body.item.selection).toBe("flagged");
    expect(body.item.state).toBe("open");
    expect(body.item.amount).toBe(body.item.features.amount);
    expect(body.reasons.length).toBeGreaterThan(0);
    expect(body.residuals).toHaveLength(SHOP_FEATURES.length);
    // Residuals travel in their wire form (null: no finite value); this payment's are all finite.
    const sizes = body.residuals!.map((r) => Math.abs(r.standardizedResidual!));
    expect(sizes).toEqual([...sizes].sort((a, b) => b - a));
    // The stored top reason is the recomputed top residual: same model, same payment.
    expect(body.residuals![0].feature).toBe(body.reasons[0].feature);
    expect(body.residuals![0].standardizedResidual).toBeCloseTo(body.reasons[0].standardizedResidual!, 9);

    const pair = body.pair!;
    expect(pair.axes.map((a) => a.feature.columns.length)).toEqual([1, 1]);
    const single = body.residuals!.filter((r) => r.feature !== "hourOfDay").map((r) => r.feature);
    expect(pair.axes.map((a) => a.feature.name)).toEqual(single.slice(0, 2));
    const [[a, b], [c, d]] = pair.covariance;
    expect(b).toBe(c);
    expect(a).toBeGreaterThan(0);
    expect(a * d - b * c).toBeGreaterThan(0);
    // The point is the payment in model units: log for amount, log1p for items and account age.
    pair.axes.forEach((axis, k) => {
      const raw = body.item.features[axis.feature.name];
      expect(pair.rawPoint[k]).toBe(raw);
      const expected = axis.feature.transform === "log" ? Math.log(raw) : axis.feature.transform === "log1p" ? Math.log1p(raw) : raw;
      expect(pair.point[k]).toBeCloseTo(expected, 12);
    });
    expect(body.evidenceGap).toBeNull();
    expect(body.history.map((h) => h.id).sort()).toEqual([first, second].sort());
  });

  it("says plainly when the model version is no longer stored and still shows the stored reasons", async () => {
    const [id] = await flagPayments(1);
    await db.prepare("UPDATE review_items SET model_version = 'm-retired' WHERE id = ?1").bind(id).run();
    await db.prepare("UPDATE review_status SET model_version = 'm-retired' WHERE item_id = ?1").bind(id).run();
    const { body } = await get<ItemDetail>(`/v1/review/items/${id}`);
    expect(body.residuals).toBeNull();
    expect(body.pair).toBeNull();
    expect(body.evidenceGap).toContain("m-retired is no longer stored");
    expect(body.reasons.length).toBeGreaterThan(0);
  });
});

describe("claims", () => {
  it("lets exactly one of two analysts win a simultaneous claim and tells the other who holds it", async () => {
    const ids = await flagPayments(6);
    for (const id of ids) {
      const [r1, r2] = await Promise.all([
        post<ActionResult & Refusal>(`/v1/review/items/${id}/claim`, {}, tokens.analyst),
        post<ActionResult & Refusal>(`/v1/review/items/${id}/claim`, {}, idrisToken),
      ]);
      const statuses = [r1.status, r2.status].sort();
      expect(statuses).toEqual([200, 409]);
      const winner = r1.status === 200 ? r1 : r2;
      const loser = r1.status === 200 ? r2 : r1;
      const holder = winner.body.item.claim!.by;
      expect(["rosa", "idris"]).toContain(holder);
      expect(loser.body.error).toBe("claimed-by-another");
      expect(loser.body.claim).toEqual(winner.body.item.claim);
      expect(loser.body.problems[0]).toMatchObject({ field: "id" });
      expect(loser.body.problems[0].rule).toContain(`is claimed by ${holder} until ${winner.body.item.claim!.until}`);
      const trail = await events(id);
      expect(trail.filter((e) => e.action === "claim")).toHaveLength(1);
      expect(trail[0].actor).toBe(holder);
    }
  });

  it("lasts 15 minutes, after which another analyst may take the item and the first may no longer decide", async () => {
    const [id] = await flagPayments(1);
    const before = Date.now();
    const first = { body: await step(`/v1/review/items/${id}/claim`) };
    const until = Date.parse(first.body.item.claim!.until);
    expect(until - before).toBeGreaterThanOrEqual(15 * 60_000 - 5);
    expect(until - Date.now()).toBeLessThanOrEqual(15 * 60_000);
    expect((await post<Refusal>(`/v1/review/items/${id}/claim`, {}, idrisToken)).status).toBe(409);

    // Let the claim run out: move its end into the past in D1, as 15 minutes of waiting would.
    await db
      .prepare("UPDATE review_status SET claim_expires_ms = ?2 WHERE item_id = ?1")
      .bind(id, Date.now() - 1)
      .run();
    expect((await get<ItemDetail>(`/v1/review/items/${id}`)).body.item.state).toBe("open");
    const late = await post<Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud" });
    expect(late.status).toBe(409);
    expect(late.body.error).toBe("claim-required");
    expect(late.body.problems[0].rule).toContain("your claim expired at");

    const second = await post<ActionResult>(`/v1/review/items/${id}/claim`, {}, idrisToken);
    expect(second.status).toBe(200);
    expect(second.body.item.claim!.by).toBe("idris");
    const refused = await post<Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud" });
    expect(refused.status).toBe(409);
    expect(refused.body.claim?.by).toBe("idris");
  });

  it("lets the holder renew and release, and refuses a release by anyone else", async () => {
    const [id] = await flagPayments(1);
    await step(`/v1/review/items/${id}/claim`);
    expect((await post<ActionResult>(`/v1/review/items/${id}/claim`)).status).toBe(200);
    const foreign = await post<Refusal>(`/v1/review/items/${id}/release`, {}, idrisToken);
    expect(foreign.status).toBe(409);
    expect(foreign.body.error).toBe("claimed-by-another");
    const released = await post<ActionResult>(`/v1/review/items/${id}/release`);
    expect(released.status).toBe(200);
    expect(released.body.item.state).toBe("open");
    const again = await post<Refusal>(`/v1/review/items/${id}/release`);
    expect(again.status).toBe(409);
    expect(again.body.error).toBe("not-claimed-by-you");
    // The renewal extended the claim without a second audit row.
    expect((await events(id)).map((e) => e.action)).toEqual(["claim", "release"]);
  });
});

describe("decisions and the audit trail", () => {
  it("needs a live claim, records who/when/from/to/note/model version, allows a change of mind and an undo", async () => {
    const [id] = await flagPayments(1);
    const unclaimed = await post<Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud" });
    expect(unclaimed.status).toBe(409);
    expect(unclaimed.body.error).toBe("claim-required");

    await step(`/v1/review/items/${id}/claim`);
    const decided = await post<ActionResult>(`/v1/review/items/${id}/decision`, { outcome: "fraud", note: "Card tested twice <b>within</b> a minute" });
    expect(decided.status).toBe(200);
    expect(decided.body.item.state).toBe("decided");
    expect(decided.body.item.decision).toMatchObject({ outcome: "fraud", by: "rosa", note: "Card tested twice <b>within</b> a minute" });
    expect(decided.body.item.claim).toBeNull();
    expect(decided.body.undoableUntil).not.toBeNull();

    // Change of mind by a colleague: claim the decided item, decide again.
    expect((await post(`/v1/review/items/${id}/claim`, {}, idrisToken)).status).toBe(200);
    const changed = await post<ActionResult>(`/v1/review/items/${id}/decision`, { outcome: "legitimate", note: "Customer confirmed by phone" }, idrisToken);
    expect(changed.body.item.decision).toMatchObject({ outcome: "legitimate", by: "idris" });
    // Rosa's undo window ended with Idris's change: only the latest decision can be undone.
    const stale = await post<Refusal>(`/v1/review/items/${id}/undo`);
    expect(stale.status).toBe(409);
    expect(stale.body.error).toBe("nothing-to-undo");

    const undone = await post<ActionResult>(`/v1/review/items/${id}/undo`, {}, idrisToken);
    expect(undone.status).toBe(200);
    expect(undone.body.item.decision).toMatchObject({ outcome: "fraud", by: "rosa", note: "Card tested twice <b>within</b> a minute" });
    expect(undone.body.item.claim?.by).toBe("idris");
    expect((await post<Refusal>(`/v1/review/items/${id}/undo`, {}, idrisToken)).body.error).toBe("nothing-to-undo");

    const trail = await events(id);
    expect(trail.map((e) => [e.action, e.actor, e.fromOutcome, e.toOutcome])).toEqual([
      ["claim", "rosa", null, null],
      ["decide", "rosa", null, "fraud"],
      ["claim", "idris", null, null],
      ["decide", "idris", "fraud", "legitimate"],
      ["undo", "idris", "legitimate", "fraud"],
    ]);
    expect(trail[1].note).toBe("Card tested twice <b>within</b> a minute");
    expect(trail[3].note).toBe("Customer confirmed by phone");
    expect(new Set(trail.map((e) => e.modelVersion))).toEqual(new Set([modelVersion]));
    for (const e of trail) expect(Math.abs(Date.parse(e.at) - Date.now())).toBeLessThan(60_000);
  });

  it("undoes a first decision back to an open item held by the analyst, so a new decision can follow", async () => {
    const [id] = await flagPayments(1);
    await step(`/v1/review/items/${id}/claim`);
    await step(`/v1/review/items/${id}/decision`, { outcome: "legitimate" });
    const undone = await post<ActionResult>(`/v1/review/items/${id}/undo`);
    expect(undone.body.item.state).toBe("claimed");
    expect(undone.body.item.decision).toBeNull();
    const redecided = await post<ActionResult>(`/v1/review/items/${id}/decision`, { outcome: "fraud" });
    expect(redecided.body.item.decision?.outcome).toBe("fraud");
  });

  it("refuses an undo after the 5-minute window", async () => {
    const [id] = await flagPayments(1);
    await step(`/v1/review/items/${id}/claim`);
    await step(`/v1/review/items/${id}/decision`, { outcome: "fraud" });
    await db
      .prepare("UPDATE review_status SET undo_until_ms = ?2 WHERE item_id = ?1")
      .bind(id, Date.now() - 1)
      .run();
    const late = await post<Refusal>(`/v1/review/items/${id}/undo`);
    expect(late.status).toBe(409);
    expect(late.body.problems[0].rule).toContain("last 5 minutes");
  });

  it("keeps the audit trail append-only: rows cannot be changed or deleted", async () => {
    await expect(db.prepare("UPDATE review_events SET actor = 'someone-else'").run()).rejects.toThrow(/append-only/);
    await expect(db.prepare("DELETE FROM review_events").run()).rejects.toThrow(/append-only/);
    expect(await countRows(db, "review_events")).toBeGreaterThan(0);
  });

  it("writes no audit row when a change is refused", async () => {
    const [id] = await flagPayments(1);
    await step(`/v1/review/items/${id}/claim`, {}, idrisToken);
    const before = await countRows(db, "review_events", "item_id = ?1", id);
    await step(`/v1/review/items/${id}/claim`, {}, tokens.analyst, 409);
    await step(`/v1/review/items/${id}/decision`, { outcome: "fraud" }, tokens.analyst, 409);
    await step(`/v1/review/items/${id}/release`, {}, tokens.analyst, 409);
    await step(`/v1/review/items/${id}/undo`, {}, tokens.analyst, 409);
    expect(await countRows(db, "review_events", "item_id = ?1", id)).toBe(before);
  });
});

describe("an account's flags decided together", () => {
  /** Actions of an item's trail in order, with who did them. */
  const trailOf = async (id: number) => (await events(id)).map((e) => `${e.action}:${e.actor}:${e.toOutcome ?? ""}`);

  it("lists the account's undecided flags oldest first, the item itself among them, and none of other accounts", async () => {
    const ids = await flagPayments(4, "acct-burst-list");
    await flagPayments(1, "acct-burst-other");
    await step(`/v1/review/items/${ids[1]}/claim`, {}, idrisToken);
    await step(`/v1/review/items/${ids[3]}/claim`);
    await step(`/v1/review/items/${ids[3]}/decision`, { outcome: "legitimate" });
    const flags = await get<AccountFlags>(`/v1/review/items/${ids[2]}/account-flags`);
    expect(flags.status).toBe(200);
    expect(flags.body.accountRef).toBe("acct-burst-list");
    expect(flags.body.items.map((i) => [i.id, i.state])).toEqual([
      [ids[0], "open"],
      [ids[1], "claimed"],
      [ids[2], "open"],
    ]);
    expect(flags.body.items[1].claim?.by).toBe("idris");
    expect(flags.body.more).toBe(false);
    const [alone] = await flagPayments(1);
    expect((await get<AccountFlags>(`/v1/review/items/${alone}/account-flags`)).body).toEqual({ accountRef: null, items: [], more: false });
    expect((await get<Refusal>("/v1/review/items/999999/account-flags")).status).toBe(404);
  });

  it("decides every named flag in one request, each with its own claim and decision rows and its own label", async () => {
    const ids = await flagPayments(5, "acct-burst-all");
    const before = await get<StateCounts>("/v1/review/counts");
    const answer = await step<AccountDecision>(`/v1/review/items/${ids[0]}/account-decision`, { ids, outcome: "fraud", note: "One card tried five times in a minute" });
    expect(answer.accountRef).toBe("acct-burst-all");
    expect(answer.refused).toEqual([]);
    expect(answer.decided.map((d) => d.item.id)).toEqual(ids);
    for (const d of answer.decided) {
      expect(d.item.state).toBe("decided");
      expect(d.item.decision).toMatchObject({ outcome: "fraud", by: "rosa", note: "One card tried five times in a minute" });
      expect(d.item.claim).toBeNull();
      expect(d.undoableUntil).not.toBeNull();
      expect(await trailOf(d.item.id)).toEqual(["claim:rosa:", "decide:rosa:fraud"]);
    }
    const after = await get<StateCounts>("/v1/review/counts");
    expect(after.body.decided - before.body.decided).toBe(5);
    expect(before.body.open - after.body.open).toBe(5);
    // Each is undone on its own, like any decision.
    expect((await post<ActionResult>(`/v1/review/items/${ids[4]}/undo`)).body.item.state).toBe("claimed");
  });

  it("reports a flag claimed by a colleague, one already decided and one of another account, leaves them as they are and decides the rest", async () => {
    const ids = await flagPayments(5, "acct-burst-mixed");
    const [stranger] = await flagPayments(1, "acct-burst-stranger");
    const held = await step(`/v1/review/items/${ids[1]}/claim`, {}, idrisToken);
    await step(`/v1/review/items/${ids[3]}/claim`, {}, idrisToken);
    await step(`/v1/review/items/${ids[3]}/decision`, { outcome: "legitimate" }, idrisToken);
    const trailsBefore = await Promise.all([ids[1], ids[3], stranger].map(trailOf));

    const res = await post<AccountDecision>(`/v1/review/items/${ids[0]}/account-decision`, { ids: [...ids, stranger], outcome: "fraud" });
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    expect(res.body.decided.map((d) => d.item.id)).toEqual([ids[0], ids[2], ids[4]]);
    expect(res.body.refused.map((r) => [r.id, r.error])).toEqual([
      [ids[1], "claimed-by-another"],
      [ids[3], "already-decided"],
      [stranger, "other-account"],
    ]);
    expect(res.body.refused[0].claim).toEqual(held.item.claim);
    expect(res.body.refused[0].rule).toContain("is claimed by idris until");
    expect(res.body.refused[1].rule).toContain("already decided legitimate by idris");
    // Left exactly as they were: no row of rosa's, the colleague's claim and decision stand.
    expect(await Promise.all([ids[1], ids[3], stranger].map(trailOf))).toEqual(trailsBefore);
    const kept = await get<ItemDetail>(`/v1/review/items/${ids[3]}`);
    expect(kept.body.item.decision).toMatchObject({ outcome: "legitimate", by: "idris" });
    expect((await get<ItemDetail>(`/v1/review/items/${ids[1]}`)).body.item.claim?.by).toBe("idris");
  });

  it("answers 409 with the report when no named flag could be decided, and writes nothing", async () => {
    const ids = await flagPayments(2, "acct-burst-none");
    for (const id of ids) await step(`/v1/review/items/${id}/claim`, {}, idrisToken);
    const eventsBefore = await countRows(db, "review_events");
    const res = await post<AccountDecision & Refusal>(`/v1/review/items/${ids[0]}/account-decision`, { ids, outcome: "legitimate" });
    expect(res.status).toBe(409);
    expect(res.body.error).toBe("none-decided");
    expect(res.body.decided).toEqual([]);
    expect(res.body.refused.map((r) => r.error)).toEqual(["claimed-by-another", "claimed-by-another"]);
    expect(res.body.problems.map((p) => p.field)).toEqual(["ids[0]", "ids[1]"]);
    expect(await countRows(db, "review_events")).toBe(eventsBefore);
  });

  it("decides each flag exactly once when two analysts decide the same account's flags at the same moment", async () => {
    const ids = await flagPayments(6, "acct-burst-race");
    const [rosa, idris] = await Promise.all([
      post<AccountDecision>(`/v1/review/items/${ids[0]}/account-decision`, { ids, outcome: "fraud" }),
      post<AccountDecision>(`/v1/review/items/${ids[0]}/account-decision`, { ids: [...ids].reverse(), outcome: "legitimate" }, idrisToken),
    ]);
    const decidedBy = new Map<number, string>();
    for (const [who, res] of [
      ["rosa", rosa],
      ["idris", idris],
    ] as const) {
      expect([200, 409]).toContain(res.status);
      for (const d of res.body.decided) {
        expect(decidedBy.has(d.item.id), `item ${d.item.id} decided twice`).toBe(false);
        decidedBy.set(d.item.id, who);
      }
      for (const r of res.body.refused) expect(["claimed-by-another", "already-decided"]).toContain(r.error);
    }
    expect([...decidedBy.keys()].sort((a, b) => a - b)).toEqual([...ids].sort((a, b) => a - b));
    for (const id of ids) {
      const decisions = (await events(id)).filter((e) => e.action === "decide");
      expect(decisions.map((e) => e.actor)).toEqual([decidedBy.get(id)]);
      const outcome = (await get<ItemDetail>(`/v1/review/items/${id}`)).body.item.decision?.outcome;
      expect(outcome).toBe(decidedBy.get(id) === "rosa" ? "fraud" : "legitimate");
    }
  });

  it("refuses a malformed request naming the field and the rule, before touching any flag", async () => {
    const [id] = await flagPayments(1, "acct-burst-bad");
    const [alone] = await flagPayments(1);
    const cases: [unknown, string, string][] = [
      [{ outcome: "fraud" }, "ids", "is required"],
      [{ ids: [], outcome: "fraud" }, "ids", "must name 1 to 50 items"],
      [{ ids: Array.from({ length: 51 }, (_, k) => k + 1), outcome: "fraud" }, "ids", "must name 1 to 50 items"],
      [{ ids: [id, id], outcome: "fraud" }, "ids", "must not name an item twice"],
      [{ ids: [1.5], outcome: "fraud" }, "ids[0]", "positive whole number"],
      [{ ids: [id, -3], outcome: "fraud" }, "ids[1]", "positive whole number"],
      [{ ids: [id], outcome: "maybe" }, "outcome", "must be fraud or legitimate"],
      [{ ids: [id], outcome: "fraud", every: true }, "every", "is not an accepted field; accepted: ids, outcome, note"],
    ];
    for (const [body, field, rule] of cases) {
      const res = await post<Refusal>(`/v1/review/items/${id}/account-decision`, body);
      expect(res.status, JSON.stringify(body)).toBe(400);
      expect(res.body.problems[0].field, JSON.stringify(res.body)).toBe(field);
      expect(res.body.problems[0].rule).toContain(rule);
    }
    const noAccount = await post<Refusal>(`/v1/review/items/${alone}/account-decision`, { ids: [alone], outcome: "fraud" });
    expect(noAccount.status).toBe(409);
    expect(noAccount.body.error).toBe("no-account");
    expect(await trailOf(id)).toEqual([]);
  });
});

describe("bad input gets a 4xx that names the field and the rule", () => {
  it("refuses unknown and malformed item ids", async () => {
    const unknown = await get<Refusal>("/v1/review/items/987654321");
    expect(unknown.status).toBe(404);
    expect(unknown.body.problems).toEqual([{ field: "id", rule: "no review item has id 987654321" }]);
    expect((await post<Refusal>("/v1/review/items/987654321/claim")).status).toBe(404);
    for (const bad of ["abc", "0", "-4", "1.5", "99999999999999999"]) {
      const res = await get<Refusal>(`/v1/review/items/${bad}`);
      expect(res.status, bad).toBe(400);
      expect(res.body.problems[0].field).toBe("id");
      expect(res.body.problems[0].rule).toContain("must be a positive whole number");
    }
  });

  it("refuses a bad outcome, a huge note, unknown fields and bodies that are not JSON", async () => {
    const [id] = await flagPayments(1);
    await step(`/v1/review/items/${id}/claim`);
    const outcome = await post<Refusal>(`/v1/review/items/${id}/decision`, { outcome: "maybe" });
    expect(outcome.status).toBe(400);
    expect(outcome.body.problems).toEqual([{ field: "outcome", rule: 'must be fraud or legitimate. Actual: string "maybe"' }]);
    const missing = await post<Refusal>(`/v1/review/items/${id}/decision`, { note: "no outcome" });
    expect(missing.body.problems[0]).toMatchObject({ field: "outcome" });
    const huge = await post<Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud", note: "x".repeat(2001) });
    expect(huge.status).toBe(400);
    expect(huge.body.problems[0].field).toBe("note");
    expect(huge.body.problems[0].rule).toContain("must be at most 2000 characters");
    expect(huge.body.problems[0].rule).toContain("2001 characters");
    const extra = await post<Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud", verdict: "x" });
    expect(extra.body.problems[0]).toMatchObject({ field: "verdict" });
    expect(extra.body.problems[0].rule).toContain("is not an accepted field");
    const tooBig = await post<Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud", note: "y".repeat(40_000) });
    expect(tooBig.status).toBe(413);
    const notJson = await post<Refusal>(`/v1/review/items/${id}/decision`, "{outcome: fraud");
    expect(notJson.status).toBe(400);
    expect(notJson.body.problems[0].field).toBe("body");
    // Nothing was decided by any of these.
    expect((await get<ItemDetail>(`/v1/review/items/${id}`)).body.item.state).toBe("claimed");
  });

  it("refuses bad list parameters one by one", async () => {
    const cases: [string, string, string][] = [
      ["state=waiting", "state", "must be open, claimed or decided"],
      ["sort=size", "sort", "must be priority, tail, amount or age"],
      ["direction=up", "direction", "must be asc or desc"],
      ["limit=0", "limit", "must be a whole number from 1 to 200"],
      ["limit=500", "limit", "must be a whole number from 1 to 200"],
      ["selection=random", "selection", "must be flagged or audit"],
      ["from=yesterday", "from", "must be a date YYYY-MM-DD"],
      ["from=2026-12-05&to=2026-12-01", "to", "must not be before from"],
      ["colour=red", "colour", "is not an accepted field"],
      ["state=open&state=decided", "state", "must be given once"],
      ["cursor=bm9wZQ", "cursor", "is not a cursor returned by this API"],
    ];
    for (const [query, field, rule] of cases) {
      const res = await get<Refusal>(`/v1/review/items?${query}`);
      expect(res.status, query).toBe(400);
      expect(res.body.problems[0].field, query).toBe(field);
      expect(res.body.problems[0].rule, query).toContain(rule);
    }
    const page = await get<QueuePage>("/v1/review/items?limit=1&sort=tail");
    const reused = await get<Refusal>(`/v1/review/items?limit=1&sort=amount&cursor=${page.body.nextCursor}`);
    expect(reused.status).toBe(400);
    expect(reused.body.problems[0].rule).toContain("was made for state=open, sort=tail");
    const format = await get<Refusal>("/v1/review/export?format=xlsx");
    expect(format.body.problems[0]).toMatchObject({ field: "format" });
  });
});

describe("paging, order and filters", () => {
  const SEGMENTS = ["web", "app", "phone"];
  const base = Date.parse("2026-11-20T00:00:00Z");
  let inserted: { id: number; segment: string; selection: string; tail: number; amount: number; scoredMs: number; version: string }[] = [];

  beforeAll(async () => {
    const payments = shopPayments(240, 77);
    const statements = payments.map((p, k) => {
      const tail = 10 ** -(2 + ((k * 7919) % 97) / 8); // many distinct values, a few repeats
      const scoredMs = base + k * 2_160_000 + ((k * 7919) % 1000); // every 36 minutes over six days
      const amount = k % 10 === 0 ? 250 : p.features.amount; // ties on amount
      return db
        .prepare(
          "INSERT INTO review_items (transaction_id, model_version, segment, account_ref, features_json, log_density, mahalanobis_sq, " +
            "tail_probability, cutoff_mahalanobis_sq, reasons_json, selection, inclusion_probability, scored_at, received_at) " +
            "VALUES (?1, ?2, ?3, NULL, ?4, -30, 40, ?5, 30, '[]', ?6, ?7, ?8, ?8)",
        )
        .bind(
          `tx-page-${k}`,
          k % 4 === 0 ? "m-paging-b" : "m-paging-a",
          SEGMENTS[k % 3],
          JSON.stringify({ ...p.features, amount }),
          tail,
          k % 5 === 0 ? "audit" : "flagged",
          k % 5 === 0 ? 0.002 : 1,
          new Date(scoredMs).toISOString(),
        );
    });
    await db.batch(statements);
    const { results } = await db
      .prepare("SELECT item_id, segment, selection, tail_probability, amount, scored_ms, model_version FROM review_status WHERE transaction_id LIKE 'tx-page-%'")
      .all<{ item_id: number; segment: string; selection: string; tail_probability: number; amount: number; scored_ms: number; model_version: string }>();
    inserted = results.map((r) => ({
      id: r.item_id,
      segment: r.segment,
      selection: r.selection,
      tail: r.tail_probability,
      amount: r.amount,
      scoredMs: r.scored_ms,
      version: r.model_version,
    }));
    expect(inserted).toHaveLength(240);
  });

  async function walk(query: string, limit: number): Promise<QueueRow[]> {
    const rows: QueueRow[] = [];
    let cursor: string | null = null;
    for (let pages = 0; pages < 100; pages++) {
      const { status, body }: { status: number; body: QueuePage } = await get<QueuePage>(`/v1/review/items?${query}&limit=${limit}${cursor ? `&cursor=${cursor}` : ""}`);
      expect(status).toBe(200);
      expect(body.items.length).toBeLessThanOrEqual(limit);
      rows.push(...body.items);
      cursor = body.nextCursor;
      if (!cursor) return rows;
    }
    throw new Error("paging did not end");
  }

  it("pages through every order in both directions without repeating or skipping a line", async () => {
    const filter = "modelVersion=m-paging-a";
    const mine = inserted.filter((r) => r.version === "m-paging-a");
    const key = {
      priority: (r: (typeof inserted)[number]) => Math.min(-Math.log10(r.tail), 15) + Math.log10(1 + r.amount) - r.scoredMs / 86_400_000,
      tail: (r: (typeof inserted)[number]) => r.tail,
      amount: (r: (typeof inserted)[number]) => r.amount,
      age: (r: (typeof inserted)[number]) => r.scoredMs,
    };
    for (const sort of ["priority", "tail", "amount", "age"] as const) {
      for (const direction of ["asc", "desc"] as const) {
        const rows = await walk(`${filter}&sort=${sort}&direction=${direction}`, 17);
        const sign = direction === "asc" ? 1 : -1;
        const expected = [...mine].sort((p, q) => sign * (key[sort](p) - key[sort](q)) || sign * (p.id - q.id)).map((r) => r.id);
        expect(
          rows.map((r) => r.id),
          `${sort} ${direction}`,
        ).toEqual(expected);
      }
    }
  });

  it("computes the documented priority: rarer, larger and older payments come first", async () => {
    const { body } = await get<QueuePage>("/v1/review/items?modelVersion=m-paging-a&limit=5");
    const now = Date.now();
    for (const row of body.items) {
      const ageDays = (now - Date.parse(row.scoredAt)) / 86_400_000;
      const expected = Math.min(-Math.log10(row.tailProbability), 15) + Math.log10(1 + (row.amount ?? 0)) + ageDays;
      expect(Math.abs(row.priority - expected)).toBeLessThan(0.01);
    }
    const priorities = body.items.map((r) => r.priority);
    expect(priorities).toEqual([...priorities].sort((a, b) => b - a));
  });

  it("filters by segment, selection, model version and scored date, and counts each state under the filters", async () => {
    const from = "2026-11-21";
    const to = "2026-11-23";
    const fromMs = Date.parse(`${from}T00:00:00Z`);
    const toMs = Date.parse(`${to}T00:00:00Z`) + 86_400_000;
    const expected = inserted
      .filter((r) => r.segment === "app" && r.selection === "audit" && r.version === "m-paging-a" && r.scoredMs >= fromMs && r.scoredMs < toMs)
      .map((r) => r.id)
      .sort((a, b) => a - b);
    expect(expected.length).toBeGreaterThan(0);
    const rows = await walk(`segment=app&selection=audit&modelVersion=m-paging-a&from=${from}&to=${to}&sort=age`, 3);
    expect(rows.map((r) => r.id).sort((a, b) => a - b)).toEqual(expected);
    for (const r of rows) expect(r).toMatchObject({ segment: "app", selection: "audit", modelVersion: "m-paging-a" });

    // Take one, decide one: the counts move between states.
    const [taken, settled] = expected;
    await step(`/v1/review/items/${taken}/claim`);
    await step(`/v1/review/items/${settled}/claim`);
    await step(`/v1/review/items/${settled}/decision`, { outcome: "legitimate" });
    const query = `segment=app&selection=audit&modelVersion=m-paging-a&from=${from}&to=${to}`;
    const counts = (await get<StateCounts>(`/v1/review/counts?${query}`)).body;
    expect(counts).toEqual({ open: expected.length - 2, claimed: 1, decided: 1 });
    expect((await get<QueuePage>(`/v1/review/items?${query}`)).body.counts).toEqual(counts);
    expect((await walk(`${query}&state=claimed`, 50)).map((r) => r.id)).toEqual([taken]);
    expect((await walk(`${query}&state=decided`, 50)).map((r) => r.id)).toEqual([settled]);
    expect((await walk(`${query}&state=open`, 50)).map((r) => r.id)).not.toContain(taken);
  });

  it("reads every page along its own index, never sorting the queue in a temporary b-tree", async () => {
    const plan = async (sql: string, params: unknown[]) =>
      (
        await db
          .prepare(`EXPLAIN QUERY PLAN ${sql}`)
          .bind(...params)
          .all<{ detail: string }>()
      ).results
        .map((r) => r.detail)
        .join(" | ");
    const now = Date.now();
    for (const sort of ["priority", "tail", "amount", "age"] as const) {
      for (const state of ["open", "decided"] as const) {
        for (const after of [null, { sort, direction: "desc" as const, state, value: 1, id: 5 }]) {
          const q = buildPageQuery({ state, sort, direction: "desc", limit: 50, after, segment: "web", selection: "flagged" }, now);
          const detail = await plan(q.sql, q.params);
          expect(detail, `${sort} ${state}`).toMatch(new RegExp(`USING (COVERING )?INDEX review_status_by_${sort}`));
          expect(detail, `${sort} ${state}`).not.toContain("TEMP B-TREE");
        }
      }
    }
    const counts = buildCountQuery({ segment: "web", modelVersion: "m", fromMs: 0 }, now);
    expect(await plan(counts.sql, counts.params)).toContain("USING COVERING INDEX review_status_counts");
  });

  it("lists the segments and model versions for the filter menus", async () => {
    const { body } = await get<{ segments: string[]; modelVersions: string[] }>("/v1/review/facets");
    expect(body.segments).toEqual(expect.arrayContaining(["app", "phone", "web"]));
    expect(body.modelVersions).toEqual(expect.arrayContaining(["m-paging-a", "m-paging-b", modelVersion]));
  });
});

describe("how rare, past the reach of a double", () => {
  it("orders payments whose tail probability underflows to 0 by their log tail, rarest first, and shows an unknown one as the rarest", async () => {
    // Two payments far out (a channel the model has no segment for, so the pooled Gaussian scores
    // them), the nearer one scored first: were the queue to sort by the tail
    // probability (0 for both), they would tie and come back in item order, nearer first.
    const scoredFar: { transactionId: string; mahalanobisSq: number; tailProbability: number; log10TailProbability: number }[] = [];
    for (const [k, shippingShare] of [1.2, 1.35].entries()) {
      const transactionId = `tx-rare-${k}`;
      const res = await worker.post("/v1/score", { transactionId, features: { ...UNUSUAL_PAYMENT, shippingShare }, segment: "post" }, tokens.flow);
      expect(res.status).toBe(200);
      scoredFar.push({ transactionId, ...((await res.json()) as { mahalanobisSq: number; tailProbability: number; log10TailProbability: number }) });
    }
    for (const s of scoredFar) {
      expect(s.mahalanobisSq).toBeGreaterThan(1500);
      expect(s.tailProbability).toBe(0);
      expect(s.log10TailProbability).toBeLessThan(-324);
    }
    expect(scoredFar[1]!.mahalanobisSq).toBeGreaterThan(scoredFar[0]!.mahalanobisSq);
    // A row as stored before the log tail was kept: tail 0 and nothing else to go on.
    await db
      .prepare(
        "INSERT INTO review_items (transaction_id, model_version, segment, account_ref, features_json, log_density, mahalanobis_sq, " +
          "tail_probability, cutoff_mahalanobis_sq, reasons_json, selection, inclusion_probability, scored_at, received_at) " +
          "VALUES ('tx-rare-legacy', ?1, '*', NULL, '{}', -900, 1700, 0, 30, '[]', 'flagged', 1, ?2, ?2)",
      )
      .bind(modelVersion, new Date().toISOString())
      .run();
    const wanted = ["tx-rare-legacy", "tx-rare-1", "tx-rare-0"];
    const rows = await eventually(async () => {
      const { body } = await get<QueuePage>(`/v1/review/items?modelVersion=${modelVersion}&segment=*&sort=tail&direction=asc&limit=50`);
      const mine = body.items.filter((r) => wanted.includes(r.transactionId));
      return mine.length === wanted.length ? mine : undefined;
    }, 15_000);
    expect(rows.map((r) => r.transactionId)).toEqual(wanted);
    expect(rows[0]!.log10TailProbability).toBeNull();
    expect(rows[1]!.log10TailProbability).toBeCloseTo(scoredFar[1]!.log10TailProbability, 9);
    expect(rows[2]!.log10TailProbability).toBeCloseTo(scoredFar[0]!.log10TailProbability, 9);
    // Paged one line at a time, the cursor carries the log tail and the order holds.
    const paged: string[] = [];
    let cursor: string | null = null;
    do {
      const { body }: { body: QueuePage } = await get<QueuePage>(
        `/v1/review/items?modelVersion=${modelVersion}&segment=*&sort=tail&direction=asc&limit=1${cursor ? `&cursor=${cursor}` : ""}`,
      );
      paged.push(...body.items.map((r) => r.transactionId));
      cursor = body.nextCursor;
    } while (cursor);
    expect(paged.filter((t) => wanted.includes(t))).toEqual(wanted);
  });
});

describe("the day's figures", () => {
  it("counts today's decisions, mine among them, the open queue and the capacity from ANALYST_DAILY_CAPACITY", async () => {
    const asked = new Date().toISOString().slice(0, 10);
    const before = (await get<DaySummary>("/v1/review/summary")).body;
    expect(before.capacityPerAnalyst).toBe(120);
    // The worker reads its own clock: at midnight UTC the day may turn between asking and answering.
    expect([asked, new Date().toISOString().slice(0, 10)]).toContain(before.day);
    const [id] = await flagPayments(1);
    const opened = (await get<DaySummary>("/v1/review/summary")).body;
    expect(opened.open).toBe(before.open + 1);
    await step(`/v1/review/items/${id}/claim`, {}, idrisToken);
    await step(`/v1/review/items/${id}/decision`, { outcome: "fraud" }, idrisToken);
    const after = (await get<DaySummary>("/v1/review/summary")).body;
    expect(after.decidedToday).toBe(before.decidedToday + 1);
    expect(after.decidedTodayByMe).toBe(before.decidedTodayByMe);
    expect(after.open).toBe(before.open);
    expect((await get<DaySummary>("/v1/review/summary", idrisToken)).body.decidedTodayByMe).toBeGreaterThanOrEqual(1);
  });
});

describe("the labelled-set export", () => {
  it("writes every decided payment as CSV that the CLI's ledger reader takes as it is, and the same as NDJSON", async () => {
    const [fraudId, legitId] = await flagPayments(2);
    for (const [id, outcome] of [
      [fraudId, "fraud"],
      [legitId, "legitimate"],
    ] as const) {
      await step(`/v1/review/items/${id}/claim`);
      await step(`/v1/review/items/${id}/decision`, { outcome, note: 'with, "quotes"\nand a line break' });
    }
    const res = await worker.fetch(`/v1/review/export?format=csv&modelVersion=${modelVersion}`, { token: tokens.analyst });
    expect(res.status).toBe(200);
    expect(res.headers.get("content-type")).toContain("text/csv");
    const text = await res.text();
    const records = parseCsvChunks([text], "export.csv");
    const header = records[0].cells;
    const features = SHOP_FEATURES.map((f) => f.name);
    expect(header).toEqual([
      "id",
      ...features,
      "model_version",
      "segment",
      "selection",
      "log_density",
      "mahalanobis_sq",
      "tail_probability",
      "outcome",
      "weight",
      "decided_at",
      "decided_by",
    ]);
    const rows = records.slice(1).map((r) => Object.fromEntries(header.map((h, k) => [h, r.cells[k]])));
    const decided = (
      await db
        .prepare(
          "SELECT s.transaction_id, s.outcome, s.decided_by, i.features_json FROM review_status s JOIN review_items i ON i.id = s.item_id WHERE s.decided = 1 AND s.model_version = ?1",
        )
        .bind(modelVersion)
        .all<{ transaction_id: string; outcome: string; decided_by: string; features_json: string }>()
    ).results;
    expect(rows).toHaveLength(decided.length);
    for (const d of decided) {
      const row = rows.find((r) => r.id === d.transaction_id)!;
      expect(row.outcome).toBe(d.outcome);
      expect(row.decided_by).toBe(d.decided_by);
      expect(row.weight).toBe("1");
      const stored = JSON.parse(d.features_json) as Record<string, number>;
      for (const f of features) expect(numberCell(row[f], "export.csv", 0, f)).toBe(stored[f]);
      for (const n of ["log_density", "mahalanobis_sq", "tail_probability"]) numberCell(row[n], "export.csv", 0, n);
      expect(Number.isNaN(Date.parse(row.decided_at))).toBe(false);
    }
    expect(text).not.toContain("quotes"); // notes stay in the audit trail, not in the labelled set

    // The CLI reads it as a ledger with --label-column outcome.
    const dir = await mkdtemp(join(tmpdir(), "isodense-export-"));
    const path = join(dir, "labels.csv");
    await writeFile(path, text);
    const ledger = await openLedger(path, { features: SHOP_FEATURES, labelColumn: "outcome" });
    const labels: (string | null)[] = [];
    for await (const row of ledger.rows) labels.push(row.label);
    expect(labels.sort()).toEqual(decided.map((d) => d.outcome).sort());

    const nd = await worker.fetch(`/v1/review/export?format=ndjson&modelVersion=${modelVersion}`, { token: tokens.analyst });
    expect(nd.headers.get("content-type")).toContain("application/x-ndjson");
    const lines = (await nd.text())
      .trim()
      .split("\n")
      .map((l) => JSON.parse(l) as Record<string, unknown>);
    expect(lines.map((l) => l.id)).toEqual(rows.map((r) => r.id));
    expect(lines[0]).toMatchObject({ outcome: rows[0].outcome, weight: 1, amount: Number(rows[0].amount) });
  });

  it("weights an audit-sample label by 1 / inclusion probability", async () => {
    await db
      .prepare(
        "INSERT INTO review_items (transaction_id, model_version, segment, account_ref, features_json, log_density, mahalanobis_sq, " +
          "tail_probability, cutoff_mahalanobis_sq, reasons_json, selection, inclusion_probability, scored_at, received_at) " +
          "VALUES ('tx-audit-1', 'm-audit', 'web', NULL, '{\"amount\":42.5,\"items\":2}', -8, 3.1, 0.68, 30, '[]', 'audit', 0.002, ?1, ?1)",
      )
      .bind(new Date().toISOString())
      .run();
    const row = await db.prepare("SELECT id FROM review_items WHERE transaction_id = 'tx-audit-1'").first<{ id: number }>();
    await step(`/v1/review/items/${row!.id}/claim`);
    await step(`/v1/review/items/${row!.id}/decision`, { outcome: "legitimate" });
    const text = await (await worker.fetch("/v1/review/export?format=csv&modelVersion=m-audit", { token: tokens.analyst })).text();
    const [header, line] = parseCsvChunks([text], "audit.csv");
    expect(header.cells.slice(0, 3)).toEqual(["id", "amount", "items"]);
    const record = Object.fromEntries(header.cells.map((h, k) => [h, line.cells[k]]));
    expect(record).toMatchObject({ id: "tx-audit-1", amount: "42.5", items: "2", selection: "audit", outcome: "legitimate", weight: "500" });
  });
});

describe("configuration", () => {
  it("answers 500 naming ANALYST_DAILY_CAPACITY when it is not a whole number", async () => {
    const other = await startApp({ vars: { ANALYST_DAILY_CAPACITY: "lots" } });
    try {
      const res = await other.fetch("/v1/review/summary", { token: other.tokens.analyst });
      expect(res.status).toBe(500);
      const body = (await res.json()) as Refusal;
      expect(body.error).toBe("configuration-error");
      expect(body.problems[0].field).toBe("ANALYST_DAILY_CAPACITY");
    } finally {
      await other.dispose();
    }
  });
});
