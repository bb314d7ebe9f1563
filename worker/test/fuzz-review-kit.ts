/**
 * What the review fuzz suites (worker/test/fuzz-review-*.test.ts) share: the app each file starts
 * with a few real flags in its store, the generators of broken review requests, and the check that
 * nothing was claimed, decided or written. The suites are split by group of endpoints so that
 * vitest runs them side by side (files run in parallel, the tests inside a file in sequence); each
 * file starts its own in-process app (./in-process.ts) with its own model version and payments.
 *
 * Routes that take input get inputs broken in one definite way (an unknown, repeated or malformed
 * query parameter, a hostile or unknown item id, a bad decision body, the wrong transport) and must
 * answer a 4xx naming the field and the rule. Routes that take none (who am I, facets, summary,
 * health, the OpenAPI document) get hostile query strings, methods and bodies and must answer
 * either their usual 200 or a 4xx of that form — never a 5xx.
 */
import fc from "fast-check";
import { afterAll, beforeAll, expect } from "vitest";
import { fitShopModel, UNUSUAL_PAYMENT } from "./fixtures";
import { deepNestingUpTo, hostileQueryPair, hostileString, jsonHeaders, notAString, queryString, segment, transportBreakers, withProtoKey, type FuzzRequest } from "./fuzz-kit";
import { countRows, eventually, publishModel, type RunningWorker } from "./harness";
import { startApp } from "./in-process";
import { storedCounts } from "./stored-counts";

/** Flags in each suite's store: review items 1 to FLAGS (the ids {@link badId} never draws). */
const FLAGS = 3;

/** A suite's running app, and the check that the fuzzing left its store as it was. */
export interface ReviewFuzzApp {
  /** The in-process app (read it inside a test: it is set once `beforeAll` has run). */
  readonly worker: RunningWorker;
  /** The live model's version, `mfuzz-review-<name>`. */
  readonly modelVersion: string;
  /** Fails unless every D1 table's row count and the KV key count are as before the fuzzing, and no review event exists. */
  expectNothingWritten(): Promise<void>;
}

/**
 * Registers the suite's `beforeAll` and `afterAll`: an in-process app with a model
 * `mfuzz-review-<name>` and three flagged payments of its own, and the counts of everything stored
 * once they are in.
 *
 * @example
 * const app = reviewFuzzApp("claims");
 * test("…", async () => fuzzEndpoint(app.worker, "POST …", idRequests("POST", "/claim", app.worker.tokens.analyst)));
 */
export function reviewFuzzApp(name: string): ReviewFuzzApp {
  const modelVersion = `mfuzz-review-${name}`;
  let worker: RunningWorker | undefined;
  let before: Record<string, number> | undefined;
  beforeAll(async () => {
    const started = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0" } });
    worker = started;
    await publishModel(started, await fitShopModel({ version: modelVersion }));
    for (let k = 0; k < FLAGS; k++) {
      const payment = { transactionId: `fz-review-${name}-${k}`, features: { ...UNUSUAL_PAYMENT, amount: 2000 + k }, segment: "web" };
      const response = await started.post("/v1/score", payment, started.tokens.flow);
      expect(response.status).toBe(200);
    }
    const db = await started.db();
    await eventually(async () => ((await countRows(db, "review_items")) === FLAGS ? true : undefined), 15_000);
    before = await storedCounts(started);
  });
  afterAll(async () => {
    await worker?.dispose();
  });
  const running = (): RunningWorker => {
    if (!worker) throw new Error("the review fuzz app is not started: read app.worker inside a test");
    return worker;
  };
  return {
    get worker() {
      return running();
    },
    modelVersion,
    async expectNothingWritten() {
      expect(before, "the counts taken before the fuzzing").toBeDefined();
      expect(await storedCounts(running())).toEqual(before);
      expect(await countRows(await running().db(), "review_events")).toBe(0);
    },
  };
}

/** Query parameters of `GET /v1/review/items`. */
export const LIST_KEYS = ["segment", "modelVersion", "selection", "from", "to", "state", "sort", "direction", "limit", "cursor"];
/** Query parameters of `GET /v1/review/counts`. */
export const COUNT_KEYS = ["segment", "modelVersion", "selection", "from", "to"];
/** Query parameters of `GET /v1/review/export`. */
export const EXPORT_KEYS = ["format", "modelVersion"];

/** Valid parameters that may ride along with a breaker. */
export const validListPair: fc.Arbitrary<[string, string]> = fc.oneof(
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

/** Requests to `path` whose query is broken in one definite way, with valid companions drawn from `alongside`. */
export function queryRequests(path: string, keys: string[], token: string, alongside: fc.Arbitrary<[string, string]>): fc.Arbitrary<FuzzRequest> {
  return fc.record({ breaker: queryBreaker(keys), extra: fc.array(alongside, { maxLength: 2 }) }).map(({ breaker, extra }) => {
    // A valid companion never repeats the breaker's key (that would be a second, different break).
    const pairs = [...breaker.pairs, ...extra.filter(([k]) => !breaker.pairs.some(([b]) => b === k))];
    return { method: "GET", path: `${path}${queryString(pairs)}`, headers: jsonHeaders(token), broke: breaker.broke };
  });
}

/** An item id that is malformed, or well-formed and not stored (ids 1–3 are). */
export const badId: fc.Arbitrary<string> = fc.oneof(
  fc.integer({ min: 1000, max: 2 ** 40 }).map(String),
  fc.constantFrom("0", "-1", "01", "1.0", "1e3", "9007199254740993", "99999999999999999", "+1", " 1", "0x1", "１"),
  hostileString.filter((s) => s.length > 0),
  fc.string({ minLength: 1, maxLength: 30 }).filter((s) => !/^[1-3]$/.test(s)),
);

/** Requests to `/v1/review/items/{id}{suffix}` with a malformed or unknown id (and `body`, if given). */
export function idRequests(method: string, suffix: string, token: string, body?: fc.Arbitrary<string | undefined>): fc.Arbitrary<FuzzRequest> {
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
export function decisionRequests(token: string, route = "decision", base: Record<string, unknown> = {}): fc.Arbitrary<FuzzRequest> {
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
export function inputless(method: string, path: string, token: string | null): fc.Arbitrary<FuzzRequest> {
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
