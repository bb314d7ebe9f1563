/**
 * Fuzzing the review API, the export and the public routes in process (./in-process.ts): FUZZ_RUNS (10,000)
 * hostile requests to each review route, to `GET /v1/health` and to `GET /openapi.json`.
 *
 * Routes that take input get inputs broken in one definite way (an unknown, repeated or malformed
 * query parameter, a hostile or unknown item id, a bad decision body, the wrong transport) and must
 * answer a 4xx naming the field and the rule. Routes that take none (who am I, facets, summary,
 * health, the OpenAPI document) get hostile query strings, methods and bodies and must answer
 * either their usual 200 or a 4xx of that form — never a 5xx. A few real flags are in the store so
 * that the list, counts and facets have rows to read; nothing may be claimed, decided or written:
 * every table and KV key is counted before and after.
 */
import fc from "fast-check";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { fitShopModel, UNUSUAL_PAYMENT } from "./fixtures";
import {
  deepNestingUpTo,
  fuzzEndpoint,
  hostileQueryPair,
  hostileString,
  jsonHeaders,
  notAString,
  queryString,
  segment,
  transportBreakers,
  withProtoKey,
  type FuzzRequest,
} from "./fuzz-kit";
import { countRows, eventually, publishModel, type RunningWorker } from "./harness";
import { startApp } from "./in-process";
import { storedCounts } from "./stored-counts";

let worker: RunningWorker;
let before: Record<string, number>;
const FLAGS = 3;

beforeAll(async () => {
  worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0" } });
  await publishModel(worker, await fitShopModel({ version: "mfuzz-review" }));
  for (let k = 0; k < FLAGS; k++) {
    const response = await worker.post("/v1/score", { transactionId: `fz-review-${k}`, features: { ...UNUSUAL_PAYMENT, amount: 2000 + k }, segment: "web" }, worker.tokens.flow);
    expect(response.status).toBe(200);
  }
  const db = await worker.db();
  await eventually(async () => ((await countRows(db, "review_items")) === FLAGS ? true : undefined), 15_000);
  before = await storedCounts(worker);
});
afterAll(async () => {
  await worker?.dispose();
});

const LIST_KEYS = ["segment", "modelVersion", "selection", "from", "to", "state", "sort", "direction", "limit", "cursor"];
const COUNT_KEYS = ["segment", "modelVersion", "selection", "from", "to"];
const EXPORT_KEYS = ["format", "modelVersion"];

/** Valid parameters that may ride along with a breaker. */
const validListPair: fc.Arbitrary<[string, string]> = fc.oneof(
  fc.constantFrom<[string, string]>(["state", "open"], ["state", "decided"], ["sort", "tail"], ["direction", "asc"], ["limit", "20"], ["selection", "flagged"], ["segment", "web"]),
);
const notDate = fc.oneof(
  fc.string({ maxLength: 30 }).filter((t) => !/^\d{4}-\d{2}-\d{2}/.test(t)),
  // Well-shaped but impossible calendar days (they once became NaN and emptied the queue).
  fc.constantFrom("2026-13-45", "2026-02-30", "2026-00-10", "2026-04-31", "2025-02-29", "2026-02-30T10:00:00Z", "2026-13-01T00:00:00Z"),
);

/** One definite breaker of a query with the given known keys. */
function queryBreaker(keys: string[]): fc.Arbitrary<{ pairs: [string, string][]; broke: string }> {
  const has = (k: string) => keys.includes(k);
  const options: fc.Arbitrary<{ pairs: [string, string][]; broke: string }>[] = [
    hostileQueryPair.filter(([k]) => !keys.includes(k) && k !== "").map((p) => ({ pairs: [p], broke: `unknown parameter ${p[0]}` })),
    fc.constantFrom(...keys).chain((k) =>
      fc.tuple(fc.string({ maxLength: 10 }), fc.string({ maxLength: 10 })).map(([a, b]) => ({
        pairs: [
          [k, a],
          [k, b],
        ] as [string, string][],
        broke: `repeated ${k}`,
      })),
    ),
  ];
  if (has("state"))
    options.push(
      fc
        .string({ maxLength: 12 })
        .filter((v) => !["open", "claimed", "decided"].includes(v))
        .map((v) => ({ pairs: [["state", v]], broke: "state" })),
    );
  if (has("sort")) options.push(hostileString.filter((v) => !["priority", "tail", "amount", "age"].includes(v)).map((v) => ({ pairs: [["sort", v]], broke: "sort" })));
  if (has("direction"))
    options.push(
      fc
        .string({ maxLength: 6 })
        .filter((v) => v !== "asc" && v !== "desc")
        .map((v) => ({ pairs: [["direction", v]], broke: "direction" })),
    );
  if (has("limit"))
    options.push(
      fc
        .oneof(
          fc.integer({ min: -1e6, max: 0 }).map(String),
          fc.integer({ min: 201, max: 1e9 }).map(String),
          fc.constantFrom("1e2", "0x10", "20.5", " 20", "", "NaN", "Infinity", "１２"),
          hostileString,
        )
        .map((v) => ({ pairs: [["limit", v]], broke: "limit" })),
    );
  if (has("cursor"))
    options.push(
      fc
        .oneof(fc.string({ minLength: 1, maxLength: 60 }), fc.base64String({ minLength: 4, maxLength: 60 }), fc.string({ minLength: 513, maxLength: 700 }))
        .map((v) => ({ pairs: [["cursor", v]], broke: "cursor" })),
    );
  if (has("selection"))
    options.push(
      fc
        .string({ maxLength: 10 })
        .filter((v) => v !== "flagged" && v !== "audit")
        .map((v) => ({ pairs: [["selection", v]], broke: "selection" })),
    );
  if (has("from")) options.push(notDate.map((v) => ({ pairs: [["from", v]], broke: "from" })));
  if (has("to")) options.push(notDate.map((v) => ({ pairs: [["to", v]], broke: "to" })));
  if (has("to"))
    options.push(
      fc.constant({
        pairs: [
          ["from", "2026-12-02"],
          ["to", "2026-12-01"],
        ] as [string, string][],
        broke: "to before from",
      }),
    );
  if (has("segment")) options.push(fc.oneof(fc.constant(""), fc.string({ minLength: 65, maxLength: 100 })).map((v) => ({ pairs: [["segment", v]], broke: "segment length" })));
  if (has("modelVersion"))
    options.push(fc.oneof(fc.constant(""), fc.string({ minLength: 129, maxLength: 200 })).map((v) => ({ pairs: [["modelVersion", v]], broke: "modelVersion length" })));
  if (has("format"))
    options.push(
      fc
        .option(
          fc.string({ maxLength: 10 }).filter((v) => v !== "csv" && v !== "ndjson"),
          { nil: undefined },
        )
        .map((v) => ({ pairs: v === undefined ? [] : ([["format", v]] as [string, string][]), broke: "format" })),
    );
  return fc.oneof(...options);
}

function queryRequests(path: string, keys: string[], token: string, alongside: fc.Arbitrary<[string, string]>): fc.Arbitrary<FuzzRequest> {
  return fc.record({ breaker: queryBreaker(keys), extra: fc.array(alongside, { maxLength: 2 }) }).map(({ breaker, extra }) => {
    // A valid companion never repeats the breaker's key (that would be a second, different break).
    const pairs = [...breaker.pairs, ...extra.filter(([k]) => !breaker.pairs.some(([b]) => b === k))];
    return { method: "GET", path: `${path}${queryString(pairs)}`, headers: jsonHeaders(token), broke: breaker.broke };
  });
}

/** An item id that is malformed, or well-formed and not stored (ids 1–3 are). */
const badId: fc.Arbitrary<string> = fc.oneof(
  fc.integer({ min: 1000, max: 2 ** 40 }).map(String),
  fc.constantFrom("0", "-1", "01", "1.0", "1e3", "9007199254740993", "99999999999999999", "+1", " 1", "0x1", "１"),
  hostileString.filter((s) => s.length > 0),
  fc.string({ minLength: 1, maxLength: 30 }).filter((s) => !/^[1-3]$/.test(s)),
);

function idRequests(method: string, suffix: string, token: string, body?: fc.Arbitrary<string | undefined>): fc.Arbitrary<FuzzRequest> {
  return fc.record({ id: badId, body: body ?? fc.constant(undefined) }).map(({ id, body: b }) => ({
    method,
    path: `/v1/review/items/${segment(id)}${suffix}`,
    headers: jsonHeaders(token),
    body: b ?? (method === "POST" ? "{}" : undefined),
    broke: `id ${JSON.stringify(id)}`,
  }));
}

/**
 * Decision bodies broken in one definite way, sent to a real item (id 1) held by nobody; `base`
 * joins every body (the account decision's `ids`), so the same breakers serve both decision routes.
 */
function decisionRequests(token: string, route = "decision", base: Record<string, unknown> = {}): fc.Arbitrary<FuzzRequest> {
  const path = `/v1/review/items/1/${route}`;
  const at = (body: string, broke: string): FuzzRequest => ({ method: "POST", path, headers: jsonHeaders(token), body, broke });
  const json = (fields: Record<string, unknown>) => JSON.stringify({ ...base, ...fields });
  return fc.oneof(
    fc
      .oneof(hostileString, fc.string({ maxLength: 12 }))
      .filter((o) => o !== "fraud" && o !== "legitimate")
      .map((o) => at(json({ outcome: o }), "outcome")),
    notAString.map((o) => at(json({ outcome: o }), "outcome type")),
    fc.constantFrom("fraud", "legitimate").chain((o) =>
      fc
        .oneof(
          notAString.filter((n) => n !== undefined),
          fc.string({ minLength: 2001, maxLength: 2100 }),
        )
        .map((n) => at(json({ outcome: o, note: n }), "note")),
    ),
    fc
      .string({ minLength: 1, maxLength: 10 })
      .filter((k) => k !== "outcome" && k !== "note" && !(k in base))
      .map((k) => at(json({ outcome: "fraud", [k]: 1 }), "unknown key")),
    withProtoKey({ ...base, outcome: "fraud" }).map((t) => at(t, "__proto__ key")),
    // Text that can mislead a reader: controls, bidirectional overrides and isolates, lone surrogates.
    fc
      .tuple(
        fc.string({ maxLength: 20 }),
        fc.constantFrom("\u0000", "\u001b", "\u007f", "\u0085", "\u202a", "\u202e", "\u2066", "\u2069", "\uD800", "\uDFFF"),
        fc.string({ maxLength: 20 }),
      )
      .filter(([a, , b]) => !/[\uD800-\uDFFF]/.test(a + b))
      .map(([a, bad, b]) => at(json({ outcome: "fraud", note: `${a}${bad}${b}` }), "note with a misleading character")),
    deepNestingUpTo(15_000).map((t) => at(`${json({ outcome: "fraud" }).slice(0, -1)},"note":${t}}`, "deeply nested note")),
    fc.constant(at(json({}), "outcome missing")),
    // A well-formed decision without a claim must be refused too (409 claim-required; for the
    // account decision, 409 no-account: the fuzzed items carry no account reference).
    fc.constantFrom("fraud", "legitimate").map((o) => at(json({ outcome: o, note: "<b>x</b>' OR 1=1" }), "no claim")),
    transportBreakers("POST", fc.constant(path), token, json({ outcome: "fraud" }), 16 * 1024),
  );
}

/** Hostile query strings, extra headers, and bodies for routes that take no input. */
function inputless(method: string, path: string, token: string | null): fc.Arbitrary<FuzzRequest> {
  return fc
    .record({
      query: fc.array(hostileQueryPair, { maxLength: 3 }),
      body: fc.option(
        fc.oneof(
          fc.jsonValue({ maxDepth: 2 }).map((v) => JSON.stringify(v)),
          deepNestingUpTo(8_000),
          hostileString,
        ),
      ),
      accept: fc.constantFrom("*/*", "text/html", "application/xml", "", "application/json; q=0"),
      method: fc.constantFrom(method, method, method, "POST", "PUT", "DELETE", "PATCH"),
    })
    .map(({ query, body, accept, method: m }) => ({
      method: m,
      path: `${path}${queryString(query)}`,
      headers: { ...(token ? jsonHeaders(token) : { "cf-connecting-ip": "192.0.2.11" }), accept },
      body: m === "GET" || body === null ? undefined : body,
      broke: `${m} with hostile query`,
    }));
}

const okOr4xx = (s: number) => s === 200 || (s >= 400 && s < 500);

describe("fuzzing the review API and the public routes", { timeout: 600_000 }, () => {
  test("GET /v1/review/items refuses every broken query", async () => {
    await fuzzEndpoint(worker, "GET /v1/review/items", queryRequests("/v1/review/items", LIST_KEYS, worker.tokens.analyst, validListPair));
  });

  test("GET /v1/review/counts refuses every broken query", async () => {
    await fuzzEndpoint(
      worker,
      "GET /v1/review/counts",
      queryRequests("/v1/review/counts", COUNT_KEYS, worker.tokens.analyst, fc.constantFrom<[string, string]>(["selection", "audit"], ["segment", "app"])),
    );
  });

  test("GET /v1/review/export refuses every broken query", async () => {
    await fuzzEndpoint(
      worker,
      "GET /v1/review/export",
      queryRequests("/v1/review/export", EXPORT_KEYS, worker.tokens.analyst, fc.constantFrom<[string, string]>(["modelVersion", "mfuzz-review"])),
    );
  });

  test("GET /v1/review/items/{id} refuses malformed and unknown ids", async () => {
    await fuzzEndpoint(worker, "GET /v1/review/items/{id}", idRequests("GET", "", worker.tokens.analyst));
  });

  test("GET /v1/review/items/{id}/events refuses malformed and unknown ids and every broken page query", async () => {
    const pages = queryRequests("/v1/review/items/1/events", ["before", "limit"], worker.tokens.analyst, fc.constantFrom<[string, string]>(["limit", "5"]));
    const badBefore = fc
      .oneof(
        fc.constantFrom("0", "-1", "01", "1.5", "1e3", "99999999999999999", ""),
        hostileString.filter((v) => !/^[1-9]\d{0,15}$/.test(v)),
      )
      .map((v): FuzzRequest => ({ method: "GET", path: `/v1/review/items/1/events${queryString([["before", v]])}`, headers: jsonHeaders(worker.tokens.analyst), broke: "before" }));
    await fuzzEndpoint(worker, "GET /v1/review/items/{id}/events", fc.oneof(idRequests("GET", "/events", worker.tokens.analyst), pages, badBefore));
  });

  for (const action of ["claim", "release", "undo"]) {
    test(`POST /v1/review/items/{id}/${action} refuses malformed and unknown ids`, async () => {
      await fuzzEndpoint(worker, `POST /v1/review/items/{id}/${action}`, idRequests("POST", `/${action}`, worker.tokens.analyst));
    });
  }

  test("POST /v1/review/items/{id}/decision refuses bad ids and every broken or unclaimed decision", async () => {
    const ids = idRequests("POST", "/decision", worker.tokens.analyst, fc.constant(JSON.stringify({ outcome: "fraud" })));
    await fuzzEndpoint(worker, "POST /v1/review/items/{id}/decision", fc.oneof({ weight: 1, arbitrary: ids }, { weight: 3, arbitrary: decisionRequests(worker.tokens.analyst) }));
  });

  // GET …/account-flags takes nothing but the id, read by the same itemId() the routes above fuzz.
  test("POST /v1/review/items/{id}/account-decision refuses bad ids, every broken body and a payment without an account", async () => {
    const token = worker.tokens.analyst;
    const ids = idRequests("POST", "/account-decision", token, fc.constant(JSON.stringify({ ids: [1], outcome: "fraud" })));
    const badIds = fc
      .oneof(
        notAString.filter((v) => !Array.isArray(v)),
        fc.array(fc.oneof(fc.constantFrom(0, -1, 1.5, 2 ** 53, "1", null), hostileString), { minLength: 1, maxLength: 4 }),
        fc.constant([]),
        fc.constant(Array.from({ length: 51 }, (_, k) => k + 1)),
        fc.constant([1, 1]),
      )
      .map(
        (v): FuzzRequest => ({
          method: "POST",
          path: "/v1/review/items/1/account-decision",
          headers: jsonHeaders(token),
          body: JSON.stringify({ ids: v, outcome: "fraud" }),
          broke: "ids",
        }),
      );
    await fuzzEndpoint(
      worker,
      "POST /v1/review/items/{id}/account-decision",
      fc.oneof({ weight: 1, arbitrary: ids }, { weight: 1, arbitrary: badIds }, { weight: 3, arbitrary: decisionRequests(token, "account-decision", { ids: [1, 2, 3] }) }),
    );
  });

  for (const path of ["/v1/review/me", "/v1/review/facets", "/v1/review/summary"]) {
    test(`GET ${path} answers hostile queries, methods and bodies with 200 or a 4xx, never a 5xx`, async () => {
      await fuzzEndpoint(worker, `GET ${path}`, inputless("GET", path, worker.tokens.analyst), { allowed: okOr4xx });
    });
  }

  for (const path of ["/v1/health", "/openapi.json"]) {
    test(`GET ${path} answers hostile queries, methods and bodies with 200 or a 4xx, never a 5xx`, async () => {
      await fuzzEndpoint(worker, `GET ${path}`, inputless("GET", path, null), { allowed: okOr4xx });
    });
  }

  test("nothing was claimed, decided or written", async () => {
    expect(await storedCounts(worker)).toEqual(before);
    const db = await worker.db();
    expect(await countRows(db, "review_events")).toBe(0);
  });
});
