/**
 * Fuzzing the scoring routes in process (./in-process.ts): FUZZ_RUNS (10,000) generated hostile requests to
 * each of `POST /v1/score` and `POST /v1/score/batch`, every one broken on purpose (type
 * confusion, deep nesting, huge numbers, `__proto__` keys, hostile Unicode, truncated JSON, wrong
 * content types, oversized bodies, out-of-domain features). Each must be refused with a 4xx naming
 * the field and the rule (a batch may instead answer 200 with every item refused that way), never a
 * 5xx, and nothing may be stored: D1 rows and KV keys are counted before and after, and the queue
 * is given time to deliver anything that slipped through (AUDIT_SAMPLE_RATE = 1 would send every
 * scored payment to review).
 */
import fc from "fast-check";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { fitShopModel, shopPayments } from "./fixtures";
import {
  deepNesting,
  fuzzEndpoint,
  hostileString,
  hugeNumberText,
  jsonHeaders,
  notANumber,
  notAString,
  okOr4xx,
  transportBreakers,
  withProtoKey,
  type FuzzRequest,
} from "./fuzz-kit";
import { publishModel, queueDelivered } from "./harness";
import { startApp, type InProcessWorker } from "./in-process";
import { storedCounts } from "./stored-counts";

let worker: InProcessWorker;
let before: Record<string, number>;

beforeAll(async () => {
  worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "1" } });
  await publishModel(worker, await fitShopModel({ version: "mfuzz-score" }));
  before = await storedCounts(worker);
});
afterAll(async () => {
  await worker?.dispose();
});

const BASE = shopPayments(50, 77).map((p, i) => ({ transactionId: `fz-${i}`, features: { ...p.features }, segment: p.channel, accountRef: `acct-${i}` }));
const FEATURE_NAMES = Object.keys(BASE[0].features);
/** Features whose transform refuses values ≤ 0 (log) or ≤ −1 (log1p). */
const DOMAIN_BREAKS: Record<string, fc.Arbitrary<number>> = {
  amount: fc.double({ min: -1e6, max: 0, noNaN: true }),
  items: fc.double({ min: -1e6, max: -1, noNaN: true }),
  accountAgeDays: fc.double({ min: -1e6, max: -1, noNaN: true }),
};

const base = fc.constantFrom(...BASE);
const feature = fc.constantFrom(...FEATURE_NAMES);

/** One payment broken in exactly one definite way; returns JSON text. */
const brokenPayment: fc.Arbitrary<{ text: string; broke: string }> = fc.oneof(
  fc
    .record({ p: base, name: feature, value: notANumber })
    .map(({ p, name, value }) => ({ text: JSON.stringify({ ...p, features: { ...p.features, [name]: value } }), broke: `features.${name} not a number` })),
  fc.record({ p: base, name: feature, huge: hugeNumberText }).map(({ p, name, huge }) => ({
    text: JSON.stringify({ ...p, features: { ...p.features, [name]: 0.5 } }).replace(`"${name}":0.5`, `"${name}":${huge}`),
    broke: `features.${name} huge`,
  })),
  fc
    .record({ p: base, name: fc.constantFrom(...Object.keys(DOMAIN_BREAKS)) })
    .chain(({ p, name }) => DOMAIN_BREAKS[name].map((v) => ({ text: JSON.stringify({ ...p, features: { ...p.features, [name]: v } }), broke: `features.${name} out of domain` }))),
  fc.record({ p: base, name: feature }).map(({ p, name }) => {
    const features: Record<string, number> = { ...p.features };
    delete features[name];
    return { text: JSON.stringify({ ...p, features }), broke: `features.${name} missing` };
  }),
  fc.record({ p: base, extra: fc.string({ minLength: 1, maxLength: 20 }).filter((k) => !FEATURE_NAMES.includes(k)) }).map(({ p, extra }) => ({
    text: JSON.stringify({ ...p, features: { ...p.features, [extra]: 1 } }),
    broke: "unknown feature",
  })),
  fc
    .record({
      p: base,
      key: fc.string({ minLength: 1, maxLength: 20 }).filter((k) => !["transactionId", "features", "segment", "accountRef"].includes(k)),
      value: fc.jsonValue({ maxDepth: 2 }),
    })
    .map(({ p, key, value }) => ({
      text: JSON.stringify({ ...p, [key]: value }),
      broke: "unknown top-level key",
    })),
  base.chain((p) => withProtoKey(p).map((text) => ({ text, broke: "__proto__ key" }))),
  fc
    .record({
      p: base,
      id: fc.oneof(
        notAString,
        fc.constant(""),
        fc.string({ minLength: 129, maxLength: 300 }),
        hostileString.filter((s) => !/^[\x21-\x7e]{1,128}$/.test(s)),
      ),
    })
    .map(({ p, id }) => ({
      text: JSON.stringify({ ...p, transactionId: id }),
      broke: "transactionId",
    })),
  fc.record({ p: base }).map(({ p }) => {
    const { transactionId: _gone, ...rest } = p;
    return { text: JSON.stringify(rest), broke: "transactionId missing" };
  }),
  fc
    .record({
      p: base,
      s: fc.oneof(
        notAString.filter((v) => v !== null),
        fc.string({ minLength: 65, maxLength: 200 }),
      ),
    })
    .map(({ p, s }) => ({ text: JSON.stringify({ ...p, segment: s }), broke: "segment" })),
  fc
    .record({
      p: base,
      a: fc.oneof(
        notAString.filter((v) => v !== null),
        fc.string({ minLength: 129, maxLength: 300 }),
      ),
    })
    .map(({ p, a }) => ({ text: JSON.stringify({ ...p, accountRef: a }), broke: "accountRef" })),
  fc.record({ p: base, nest: deepNesting, where: fc.constantFrom("features", "feature", "top") }).map(({ p, nest, where }) => {
    if (where === "features") return { text: JSON.stringify({ ...p, features: "@@" }).replace('"@@"', nest), broke: "deeply nested features" };
    if (where === "feature") return { text: JSON.stringify({ ...p, features: { ...p.features, amount: "@@" } }).replace('"@@"', nest), broke: "deeply nested feature" };
    return { text: nest, broke: "deeply nested body" };
  }),
  fc
    .oneof(
      fc.jsonValue({ maxDepth: 2 }).filter((v) => typeof v !== "object" || v === null || Array.isArray(v)),
      fc.constant(null),
    )
    .map((v) => ({ text: JSON.stringify(v), broke: "body not an object" })),
  fc
    .record({ p: base, features: notANumber.filter((v) => typeof v !== "object" || v === null || Array.isArray(v)) })
    .map(({ p, features }) => ({ text: JSON.stringify({ ...p, features }), broke: "features not an object" })),
);

function scoreRequest(token: string): fc.Arbitrary<FuzzRequest> {
  return fc.oneof(
    { weight: 5, arbitrary: brokenPayment.map(({ text, broke }) => ({ method: "POST", path: "/v1/score", headers: jsonHeaders(token), body: text, broke })) },
    { weight: 1, arbitrary: transportBreakers("POST", fc.constant("/v1/score"), token, JSON.stringify(BASE[0]), 16 * 1024) },
  );
}

/** Batch envelopes broken as a whole, or lists whose every item is broken. */
function batchRequest(token: string): fc.Arbitrary<FuzzRequest> {
  const at = (text: string, broke: string): FuzzRequest => ({ method: "POST", path: "/v1/score/batch", headers: jsonHeaders(token), body: text, broke });
  return fc.oneof(
    {
      weight: 4,
      arbitrary: fc
        .array(brokenPayment, { minLength: 1, maxLength: 8 })
        .map((items) => at(`{"payments":[${items.map((i) => i.text).join(",")}]}`, `items: ${items.map((i) => i.broke).join("; ")}`)),
    },
    { weight: 1, arbitrary: fc.oneof(notANumber, fc.constant([])).map((v) => at(JSON.stringify({ payments: v }), "payments not a list or empty")) },
    { weight: 1, arbitrary: fc.integer({ min: 101, max: 400 }).map((n) => at(JSON.stringify({ payments: Array.from({ length: n }, () => ({})) }), "more than MAX_BATCH")) },
    {
      weight: 1,
      arbitrary: fc
        .string({ minLength: 1, maxLength: 10 })
        .filter((k) => k !== "payments")
        .map((k) => at(JSON.stringify({ payments: [BASE[0]], [k]: 1 }), "unknown envelope key")),
    },
    { weight: 1, arbitrary: withProtoKey({ payments: [] }).map((text) => at(text, "__proto__ envelope")) },
    { weight: 1, arbitrary: deepNesting.map((text) => at(`{"payments":${text}}`, "deeply nested payments")) },
    { weight: 1, arbitrary: transportBreakers("POST", fc.constant("/v1/score/batch"), token, JSON.stringify({ payments: [BASE[0]] }), 1024 * 1024) },
  );
}

/** A batch 200 must refuse every item with a 4xx naming a field under payments[i]. */
function everyItemRefused(status: number, body: unknown): string | null {
  if (status !== 200) return null;
  const answer = body as { results?: { index: number; outcome: string; status?: number; problems?: { field: string; rule: string }[] }[] };
  const results = answer.results ?? [];
  if (results.length === 0) return "200 without results";
  for (const r of results) {
    if (r.outcome !== "refused") return `item ${r.index} was ${r.outcome}`;
    if (!r.status || r.status < 400 || r.status >= 500) return `item ${r.index} refused with ${r.status}`;
    if (!r.problems?.length || r.problems.some((p) => !p.field.startsWith(`payments[${r.index}]`) || p.rule === ""))
      return `item ${r.index} problems do not name payments[${r.index}]`;
  }
  return null;
}

describe("fuzzing the scoring routes", { timeout: 600_000 }, () => {
  test("POST /v1/score refuses every generated hostile request with a 4xx naming the field and the rule", async () => {
    const run = await fuzzEndpoint(worker, "POST /v1/score", scoreRequest(worker.tokens.flow));
    expect(Object.keys(run.statuses).every((s) => Number(s) >= 400 && Number(s) < 500)).toBe(true);
  });

  test("POST /v1/score/batch refuses every hostile envelope, and every hostile item inside a 200", async () => {
    await fuzzEndpoint(worker, "POST /v1/score/batch", batchRequest(worker.tokens.flow), {
      allowed: okOr4xx,
      check: everyItemRefused,
    });
  });

  test("nothing of the refused requests was stored: no review row, no KV key, no queue delivery", async () => {
    // Anything enqueued would have reached D1 before the marker's review row (one item, one queue line).
    await worker.settle();
    await queueDelivered(worker, "fz-marker");
    expect(await storedCounts(worker)).toEqual({ ...before, review_items: before.review_items + 1, review_status: before.review_status + 1 });
  });
});
