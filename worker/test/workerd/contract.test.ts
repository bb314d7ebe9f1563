/**
 * Real answers against the API contract. The bundled worker runs on workerd (real KV, D1, Queues and
 * Durable Objects); one tour through every route, as the payment flow, an analyst and an admin would
 * use them, checks each answer against the schema the contract declares for its route and status
 * (worker/src/contract/operations.ts): a field the answer carries but the contract does not declare,
 * a missing one, a wrong type or an undeclared status fails here with the request and the answer.
 * The tour must reach every route's success answer at least once, so a new route cannot go unchecked;
 * and every route the app registers must be declared in the contract (and so in /openapi.json).
 *
 * Payments are invented (worker/test/fixtures.ts).
 */
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { z } from "zod";
import type { RenewReport } from "../../../shared-model/src/renew-report";
import { errorSchema, operationFor, OPERATIONS, type Operation } from "../../src/contract";
import { app } from "../../src/app";
import { fitShopModel, shopPayments, UNUSUAL_PAYMENT } from "../fixtures";
import { eventually, makeTokens, startWorker, type RunningWorker } from "../harness";

const tokens = makeTokens();
/** The weekly report's trigger (wrangler.toml). */
const WEEKLY_CRON = "0 4 * * 1";
const secondAnalyst = `test-ana-${"5c1e".repeat(8)}`;
let worker: RunningWorker;

/** `method path status` of every answer checked, in OpenAPI form. */
const checked = new Set<string>();

beforeAll(async () => {
  worker = await startWorker({
    tokens,
    vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0.5", DRIFT_FLUSH_PAYMENTS: "5", DRIFT_FLUSH_SECONDS: "3600" },
    secrets: { ANALYST_CREDENTIALS: `lena:${tokens.analyst},omar:${secondAnalyst}` },
  });
});
afterAll(async () => {
  await worker?.dispose();
});

/** The declared route of a concrete path: an exact match first, else one whose `{parameters}` fit. */
function declared(method: string, path: string): Operation {
  const bare = path.split("?")[0];
  const found = operationFor(method, bare) ?? OPERATIONS.find((o) => o.method === method.toLowerCase() && new RegExp(`^${o.path.replace(/\{[A-Za-z]+\}/g, "[^/]+")}$`).test(bare));
  if (!found) throw new Error(`${method} ${bare} is not declared in the contract`);
  return found;
}

/**
 * Sends a request and checks the answer against the contract: the status must be declared for the
 * route, and the body must parse with the declared schema (or have a declared media type).
 */
async function call<T = unknown>(method: string, path: string, options: { token?: string | null; body?: unknown; status?: number } = {}): Promise<T> {
  const res = await worker.fetch(path, {
    method,
    token: options.token === undefined ? tokens.admin : options.token,
    ...(options.body === undefined ? {} : { headers: { "content-type": "application/json" }, body: JSON.stringify(options.body) }),
  });
  const text = await res.text();
  const request = `${method} ${path}${options.body === undefined ? "" : ` ${JSON.stringify(options.body).slice(0, 300)}`}`;
  if (options.status !== undefined) expect(res.status, `${request} answered ${res.status}: ${text.slice(0, 600)}`).toBe(options.status);
  const operation = declared(method, path);
  const answer = operation.answers[res.status];
  expect(answer, `${request} answered ${res.status}, a status the contract does not declare for ${operation.path}: ${text.slice(0, 600)}`).toBeDefined();
  checked.add(`${operation.method} ${operation.path} ${res.status}`);
  if ("mediaTypes" in answer) {
    expect(answer.mediaTypes, request).toContain((res.headers.get("content-type") ?? "").split(";")[0]);
    return text as T;
  }
  const schema: z.ZodType = "error" in answer ? errorSchema : answer.schema;
  const body = JSON.parse(text) as unknown;
  const parsed = schema.safeParse(body);
  expect(parsed.success, `${request} → ${res.status} does not match the contract:\n${parsed.success ? "" : z.prettifyError(parsed.error)}\n${text.slice(0, 1500)}`).toBe(true);
  return body as T;
}

/** The report `isodense renew` files beside a candidate it published as the shadow (invented figures). */
function renewReport(live: string, candidate: string): RenewReport {
  const figures = (version: string, prAuc: number) => ({ version, prAuc, recallAtLiveRate: 0.8, cutoffMahalanobisSq: 14.5, latestWeekFlagRate: 0.02 });
  const week = { from: "2026-02-23T00:00:00.000Z", to: "2026-03-02T00:00:00.000Z" };
  return {
    format: "isodense.renew/v1",
    createdAt: "2026-03-02T09:30:00.000Z",
    outcome: "published",
    reasons: [],
    liveVersion: live,
    candidateVersion: candidate,
    shadowBefore: null,
    window: { from: "2026-02-02T00:00:00.000Z", to: week.to, days: 28 },
    ledger: { source: "demo ledger", rowsRead: 3000, rowsInWindow: 3000, confirmedFraudLeftOut: 2, ledgerFraudLeftOut: 0, dismissedKept: 9, rowsUsed: 2998 },
    labels: { rows: 11, fraud: 2 },
    live: figures(live, 0.61),
    candidate: figures(candidate, 0.64),
    liveFlagRateOnLabels: 0.2,
    latestWeek: { ...week, payments: 700 },
    overlap: { live: 60, candidate: 58, both: 51 },
    gate: { passed: true, thresholds: { maxPrAucDrop: 0.02, maxRecallDrop: 0.05, flagRateBand: [0.5, 2] }, checks: [] },
    diagnostics: [],
    drift: [],
  };
}

describe("every answer of a tour through the API matches its declared schema", () => {
  const live = "m20260302-contract01";
  const candidate = "m20260302-contract02";

  it("health, the document and the models routes", async () => {
    await call("GET", "/v1/health", { token: null, status: 503 });
    await call("GET", "/openapi.json", { token: null, status: 200 });
    await call("POST", "/v1/models", { body: await fitShopModel({ version: live }), status: 201 });
    await call("POST", "/v1/models", { body: await fitShopModel({ version: live }), status: 200 });
    await call("POST", "/v1/models", { body: await fitShopModel({ version: candidate, seed: 12, cutoffRate: 0.05 }), status: 201 });
    await call("POST", "/v1/models", { body: { format: "not-a-model" }, status: 422 });
    await call("POST", `/v1/models/${live}/activate`, { status: 200 });
    await call("POST", `/v1/models/${live}/activate`, { status: 200 });
    await call("PUT", "/v1/models/shadow", { body: { version: candidate }, status: 200 });
    await call("POST", `/v1/models/${candidate}/renew-report`, { body: renewReport(live, candidate), status: 201 });
    await call("POST", `/v1/models/${candidate}/renew-report`, { body: renewReport(live, candidate), status: 200 });
    await call("PUT", "/v1/models/shadow", { body: { version: 7 }, status: 400 });
    await call("GET", "/v1/models", { status: 200 });
    await call("GET", `/v1/models/${live}`, { status: 200 });
    await call("GET", "/v1/models/m-not-stored", { status: 404 });
    await call("GET", "/v1/health", { token: null, status: 200 });
  });

  it("scoring: single payments, a batch with a refusal, a conflicting repeat and the echo", async () => {
    await call("POST", "/v1/score", { token: tokens.flow, body: { transactionId: "tx-c-flag", features: UNUSUAL_PAYMENT, segment: "web", accountRef: "acct-c1" }, status: 200 });
    await call("POST", "/v1/score", { token: tokens.flow, body: { transactionId: "tx-c-flag", features: { ...UNUSUAL_PAYMENT, items: 3 }, segment: "web" }, status: 409 });
    await call("POST", "/v1/score", { token: tokens.flow, body: { transactionId: "tx c", features: { amount: "12" } }, status: 400 });
    const payments = shopPayments(12, 31).map((p, i) => ({ transactionId: `tx-c-batch-${i}`, features: p.features, segment: p.channel, accountRef: "acct-c1" }));
    payments.push({ transactionId: "tx-c-second-flag", features: { ...UNUSUAL_PAYMENT, amount: 3100 }, segment: "app", accountRef: "acct-c1" });
    await call("POST", "/v1/score/batch", { token: tokens.flow, body: { payments: [...payments, { transactionId: "tx-c-bad" }] }, status: 200 });
    await call("POST", "/v1/echo", { token: tokens.flow, body: { hello: ["isodense", 1, null] }, status: 200 });
    await call("GET", "/v1/review/me", { token: tokens.flow, status: 403 });
    await call("GET", "/v1/review/me", { token: "not-a-known-token-0000000000", status: 401 });
  });

  it("the review queue: list, counts, facets, summary, an item, its trail, and every action", async () => {
    const page = await eventually(async () => {
      const found = await call<{ items: { id: number; transactionId: string }[] }>("GET", "/v1/review/items?sort=tail&limit=5", { token: tokens.analyst, status: 200 });
      return found.items.some((i) => i.transactionId === "tx-c-flag") && found.items.length >= 2 ? found : undefined;
    }, 20_000);
    const id = page.items.find((i) => i.transactionId === "tx-c-flag")!.id;
    const other = page.items.find((i) => i.id !== id)!.id;
    const as = { token: tokens.analyst };
    await call("GET", "/v1/review/items?state=nowhere", { ...as, status: 400 });
    await call("GET", "/v1/review/counts?selection=flagged", { ...as, status: 200 });
    await call("GET", "/v1/review/facets", { ...as, status: 200 });
    await call("GET", "/v1/review/summary", { ...as, status: 200 });
    await call("GET", "/v1/review/me", { ...as, status: 200 });
    await call("GET", `/v1/review/items/${id}`, { ...as, status: 200 });
    await call("GET", "/v1/review/items/0", { ...as, status: 400 });
    await call("GET", "/v1/review/items/999999", { ...as, status: 404 });
    await call("POST", `/v1/review/items/${id}/claim`, { ...as, body: {}, status: 200 });
    await call("POST", `/v1/review/items/${id}/claim`, { token: secondAnalyst, body: {}, status: 409 });
    await call("POST", `/v1/review/items/${id}/decision`, { ...as, body: { outcome: "maybe" }, status: 400 });
    await call("POST", `/v1/review/items/${id}/decision`, { ...as, body: { outcome: "fraud", note: "Large basket at 4 a.m. on a day-old account." }, status: 200 });
    await call("POST", `/v1/review/items/${id}/undo`, { ...as, body: {}, status: 200 });
    await call("POST", `/v1/review/items/${id}/decision`, { ...as, body: { outcome: "fraud" }, status: 200 });
    await call("GET", `/v1/review/items/${id}/events?limit=2`, { ...as, status: 200 });
    await call("GET", `/v1/review/items/${id}`, { ...as, status: 200 });
    await call("POST", `/v1/review/items/${other}/claim`, { ...as, body: {}, status: 200 });
    await call("POST", `/v1/review/items/${other}/release`, { ...as, body: {}, status: 200 });
    // The account's other flag, decided with the account's flags together; then nothing is left to decide.
    const flags = await call<{ items: { id: number }[] }>("GET", `/v1/review/items/${id}/account-flags`, { ...as, status: 200 });
    const open = flags.items.map((i) => i.id).filter((i) => i !== id);
    expect(open.length).toBeGreaterThan(0);
    await call("POST", `/v1/review/items/${id}/account-decision`, { ...as, body: { ids: open, outcome: "fraud", note: "Same account, same night." }, status: 200 });
    await call("POST", `/v1/review/items/${id}/account-decision`, { ...as, body: { ids: open, outcome: "fraud" }, status: 409 });
    await call("POST", `/v1/review/items/${id}/account-decision`, { ...as, body: { ids: [], outcome: "fraud" }, status: 400 });
    // Decide every item, so that whole days are decided and the operating table has labels.
    const rest = await call<{ items: { id: number }[] }>("GET", "/v1/review/items?limit=200", { ...as, status: 200 });
    for (const open of rest.items) {
      await call("POST", `/v1/review/items/${open.id}/claim`, { ...as, body: {}, status: 200 });
      await call("POST", `/v1/review/items/${open.id}/decision`, { ...as, body: { outcome: "legitimate" }, status: 200 });
    }
    await call("GET", "/v1/review/export?format=csv", { ...as, status: 200 });
    await call("GET", "/v1/review/export?format=ndjson", { ...as, status: 200 });
  });

  it("the model page: its figures, the operating table, the shadow, the histogram, a publish and a rollback", async () => {
    const as = { token: tokens.analyst };
    // The weekly report, so that the page carries a stored one.
    await (await worker.mf.getWorker()).scheduled({ cron: WEEKLY_CRON, scheduledTime: new Date() });
    const page = await call<{ report: unknown }>("GET", "/v1/insights/model?days=7", { ...as, status: 200 });
    expect(page.report).not.toBeNull();
    await call("GET", "/v1/insights/model?days=700", { ...as, status: 400 });
    const operating = await call<{ cutoff: { mahalanobisSq: number }; atCutoff: unknown; unavailable: string | null }>("GET", "/v1/insights/operating?cutoff=20", {
      ...as,
      status: 200,
    });
    expect(operating.atCutoff, String(operating.unavailable)).not.toBeNull();
    await call("GET", "/v1/insights/shadow", { ...as, status: 200 });
    await call("GET", "/v1/insights/histogram", { ...as, status: 200 });
    const publish = { fromVersion: live, cutoffMahalanobisSq: operating.cutoff.mahalanobisSq + 2, flagRate: null, reason: "Tour of the API contract.", confirm: "publish" };
    await call("POST", "/v1/insights/publish-cutoff", { body: { ...publish, confirm: "yes" }, status: 400 });
    await call("POST", "/v1/insights/publish-cutoff", { body: publish, status: 201 });
    await call("POST", "/v1/models/rollback", { body: {}, status: 200 });
  });

  it("privacy: retention, the audit trail's check and erasure on request", async () => {
    await call("POST", "/v1/retention/run", { body: {}, status: 200 });
    await call("GET", "/v1/retention/runs", { status: 200 });
    await call("GET", "/v1/audit/verify", { status: 200 });
    await call("DELETE", "/v1/accounts/acct-c1/history", { status: 200 });
    await call("DELETE", "/v1/accounts/acct-c1", { status: 200 });
    await call("DELETE", "/v1/accounts/acct%20c1", { status: 400 });
    await call("GET", "/v1/audit/verify", { status: 200 });
  });

  it("reached the success answer of every route the contract declares", () => {
    const missing = OPERATIONS.filter((o) => !Object.keys(o.answers).some((status) => Number(status) < 300 && checked.has(`${o.method} ${o.path} ${status}`)));
    expect(missing.map((o) => `${o.method.toUpperCase()} ${o.path}`)).toEqual([]);
  });
});

describe("the contract and the app", () => {
  it("declare the same routes: every route the app registers is in the contract, secured unless public", () => {
    const routes = [...new Set(app.routes.filter((r) => r.method !== "ALL").map((r) => `${r.method} ${r.path}`))];
    expect(routes.length).toBeGreaterThan(20);
    for (const route of routes) {
      const [method, path] = route.split(" ");
      const operation = operationFor(method, path);
      expect(operation, `${route} is missing from the contract (worker/src/contract/operations.ts)`).toBeDefined();
      expect(operation?.public ?? false, route).toBe(route === "GET /v1/health" || route === "GET /openapi.json");
    }
    expect(OPERATIONS.length).toBe(routes.length);
  });
});
