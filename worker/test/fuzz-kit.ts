/**
 * Shared machinery of the fuzz suites (worker/test/fuzz-*.test.ts): fast-check generators of hostile
 * requests, a runner that sends them in-process through Miniflare's `dispatchFetch` (no HTTP
 * server) with bounded concurrency, and the checks every answer must pass.
 *
 * Why `fc.sample` with a fixed seed and not `fc.assert`: an async property runs one input at a
 * time; sampling first lets 10,000 requests per endpoint (in CI) go out 16 at a time, and the fixed seed
 * keeps every CI run on the same inputs (FUZZ_SEED=… explores others; FUZZ_RUNS=… changes the
 * count). A failure prints the offending inputs so they can be replayed by hand.
 */
import fc from "fast-check";
import { expect } from "vitest";
import { byTestDepth } from "../../shared-model/src/test-support";
import type { RunningWorker } from "./harness";

/** Inputs per endpoint: 10,000 in CI (test depth `thorough`), 300 for `npm test`; FUZZ_RUNS=… overrides. */
export const FUZZ_RUNS = Number(process.env.FUZZ_RUNS ?? byTestDepth({ quick: 300, thorough: 10_000 }));
/** Seed of the generators. */
export const FUZZ_SEED = Number(process.env.FUZZ_SEED ?? 20261201);
/** Requests in flight at once. */
const CONCURRENCY = 16;

/** One generated request. `body` is sent as given (text or raw bytes). */
export interface FuzzRequest {
  method: string;
  path: string;
  headers: Record<string, string>;
  body?: string | Uint8Array;
  /** What the generator broke, for failure reports. */
  broke: string;
}

/** One answer that broke the contract. */
interface Violation {
  request: FuzzRequest;
  status: number;
  text: string;
  why: string;
}

/** What a suite expects of every answer. */
export interface Expectation {
  /** Statuses allowed (default: 4xx only). */
  allowed?: (status: number) => boolean;
  /** Extra check of a parsed JSON answer; return a reason to fail, or null. */
  check?: (status: number, body: unknown, request: FuzzRequest) => string | null;
}

/** Summary of one endpoint's run, collected for docs/reliability.md (status 0: the connection failed). */
export interface FuzzRun {
  endpoint: string;
  inputs: number;
  statuses: Record<number, number>;
  ms: number;
}

export const fuzzRuns: FuzzRun[] = [];

/**
 * Generates `FUZZ_RUNS` requests from `arbitrary`, sends them, and fails listing up to five
 * violations: any 5xx, any status outside `allowed`, an answer that is not JSON, or a 4xx whose
 * body is not `{ error, problems: [{ field, rule }] }` with both strings non-empty.
 */
export async function fuzzEndpoint(worker: RunningWorker, endpoint: string, arbitrary: fc.Arbitrary<FuzzRequest>, expectation: Expectation = {}): Promise<FuzzRun> {
  const allowed = expectation.allowed ?? ((s: number) => s >= 400 && s < 500);
  const requests = fc.sample(arbitrary, { numRuns: FUZZ_RUNS, seed: FUZZ_SEED });
  const violations: Violation[] = [];
  const statuses: Record<number, number> = {};
  const started = Date.now();
  let next = 0;
  async function lane(): Promise<void> {
    while (next < requests.length) {
      const request = requests[next++];
      // No retry: every early answer (404, 413, 415, a refusal, a route that takes no body) goes out
      // after the worker has read the body (worker/src/middleware/drain-body.ts), so a failed
      // connection is a finding like any other.
      let response: Response;
      let text: string;
      try {
        response = await worker.fetch(request.path, { method: request.method, headers: request.headers, body: request.body as BodyInit | undefined });
        text = await response.text();
      } catch (failure) {
        statuses[0] = (statuses[0] ?? 0) + 1;
        violations.push({ request, status: 0, text: String(failure), why: "the connection failed" });
        continue;
      }
      statuses[response.status] = (statuses[response.status] ?? 0) + 1;
      const why = judge(response, text, request, allowed, expectation.check);
      if (why) violations.push({ request, status: response.status, text: text.slice(0, 300), why });
    }
  }
  await Promise.all(Array.from({ length: CONCURRENCY }, lane));
  const run = { endpoint, inputs: requests.length, statuses, ms: Date.now() - started };
  // Still alive and answering after the barrage (a reset above must not hide a crash).
  const health = await worker.fetch("/v1/health");
  await health.arrayBuffer();
  if (health.status >= 500) violations.push({ request: requests[0], status: health.status, text: "health after the run", why: "worker unhealthy after the run" });
  fuzzRuns.push(run);
  const report = violations.slice(0, 5).map((v) => ({ why: v.why, status: v.status, answer: v.text, request: describeRequest(v.request) }));
  expect(report, `${violations.length} of ${requests.length} answers to ${endpoint} broke the contract`).toEqual([]);
  expect(requests.length).toBe(FUZZ_RUNS);
  return run;
}

/**
 * The offending request as a failure message shows it: what the generator broke, method, path,
 * headers and the start of the body (raw bytes as their count and first bytes in hex).
 */
export function describeRequest(request: Pick<FuzzRequest, "method" | "path" | "headers" | "body"> & { broke?: string }): string {
  const body =
    request.body === undefined
      ? "(no body)"
      : typeof request.body === "string"
        ? `${JSON.stringify(request.body.slice(0, 300))}${request.body.length > 300 ? ` … (${request.body.length} characters)` : ""}`
        : `<${request.body.byteLength} bytes: ${Array.from(request.body.slice(0, 32), (b) => b.toString(16).padStart(2, "0")).join(" ")}${request.body.byteLength > 32 ? " …" : ""}>`;
  const broke = request.broke ? ` [broke: ${request.broke}]` : "";
  return `${request.method} ${request.path.slice(0, 200)}${broke} headers ${JSON.stringify(request.headers)} body ${body}`;
}

function judge(response: Response, text: string, request: FuzzRequest, allowed: (s: number) => boolean, check?: Expectation["check"]): string | null {
  if (response.status >= 500) return "5xx";
  if (!allowed(response.status)) return `status ${response.status} not allowed`;
  const type = response.headers.get("content-type") ?? "";
  if (!type.startsWith("application/json")) return `content-type ${type}`;
  let body: unknown;
  try {
    body = JSON.parse(text);
  } catch {
    return "answer is not JSON";
  }
  if (response.status >= 400) {
    const error = body as { error?: unknown; problems?: { field?: unknown; rule?: unknown }[] };
    if (typeof error.error !== "string" || error.error === "") return "no error code";
    if (!Array.isArray(error.problems) || error.problems.length === 0) return "no problems listed";
    for (const p of error.problems) {
      if (typeof p.field !== "string" || p.field === "" || typeof p.rule !== "string" || p.rule === "") return "a problem without field or rule";
    }
  }
  return check ? check(response.status, body, request) : null;
}

// ---------------------------------------------------------------------------------------------
// Generators
// ---------------------------------------------------------------------------------------------

/** The usual 200 or a 4xx: what a route may answer input it ignores or merely looks up with. */
export const okOr4xx = (status: number): boolean => status === 200 || (status >= 400 && status < 500);

/** Values of every JSON type but number (type confusion for numeric fields). */
export const notANumber: fc.Arbitrary<unknown> = fc.oneof(
  fc.string({ maxLength: 20 }),
  fc.double().map((d) => String(d)),
  fc.boolean(),
  fc.constant(null),
  fc.array(fc.integer(), { maxLength: 3 }),
  fc.dictionary(fc.string({ maxLength: 5 }), fc.integer(), { maxKeys: 3 }),
);

/** Values of every JSON type but string. */
export const notAString: fc.Arbitrary<unknown> = fc.oneof(
  fc.double({ noNaN: true, noDefaultInfinity: true }),
  fc.boolean(),
  fc.constant(null),
  fc.array(fc.string({ maxLength: 3 }), { maxLength: 3 }),
  fc.dictionary(fc.string({ maxLength: 5 }), fc.string({ maxLength: 5 }), { maxKeys: 3 }),
);

/**
 * Nested arrays or objects up to 3,000 deep, as JSON text (deep nesting attacks). Kept under the
 * 16 KiB limit of the smallest routes, so the parser and validators meet it rather than the size
 * check (an oversized body is its own breaker).
 */
export const deepNesting: fc.Arbitrary<string> = fc
  .tuple(fc.integer({ min: 50, max: 3_000 }), fc.boolean())
  .map(([depth, objects]) => (objects ? '{"a":'.repeat(depth) + "1" + "}".repeat(depth) : "[".repeat(depth) + "]".repeat(depth)));

/** {@link deepNesting} cut to texts of at most `maxBytes` (for routes with small body limits). */
export function deepNestingUpTo(maxBytes: number): fc.Arbitrary<string> {
  return deepNesting.map((t) =>
    t.length <= maxBytes ? t : t.startsWith("[") ? "[".repeat(maxBytes / 2) + "]".repeat(maxBytes / 2) : '{"a":'.repeat(maxBytes / 6) + "1" + "}".repeat(maxBytes / 6),
  );
}

/** Numbers written so that JSON.parse gives ±Infinity, or integers past 2^53. */
export const hugeNumberText: fc.Arbitrary<string> = fc.oneof(
  fc.integer({ min: 309, max: 100_000 }).map((e) => `1e${e}`),
  fc.integer({ min: 309, max: 100_000 }).map((e) => `-9.9e${e}`),
  fc.constant("1" + "0".repeat(400)),
);

/** Strings across Unicode: lone surrogates, controls, right-to-left marks, emoji, NULs. */
export const hostileString: fc.Arbitrary<string> = fc.oneof(
  fc.string({ unit: "binary", maxLength: 40 }),
  fc.constantFrom("\u0000", "\uD800", "\uDFFF", "\u202E", "\u200B", "💳", "' OR 1=1 --", "<script>alert(1)</script>", "\r\n", "%00", "../../etc"),
);

/** A media type other than application/json, or JSON in a charset other than UTF-8 (or none at all: null). */
export const wrongContentType: fc.Arbitrary<string | null> = fc.constantFrom(
  null,
  "text/plain",
  "application/x-www-form-urlencoded",
  "multipart/form-data; boundary=x",
  "application/jsonx",
  "application/xml",
  "json",
  "",
  "application/json-seq",
  "text/json",
  // JSON declared in another charset: read as UTF-8 it would mean something else.
  "application/json; charset=utf-16",
  "application/json; charset=UTF-16LE",
  'application/json; charset="iso-8859-1"',
);

/** Bytes that are not valid UTF-8. */
export const invalidUtf8: fc.Arbitrary<Uint8Array> = fc
  .tuple(fc.uint8Array({ maxLength: 20 }), fc.constantFrom([0xc3, 0x28], [0xff], [0xe2, 0x82], [0xf0, 0x28, 0x8c, 0x28], [0xed, 0xa0, 0x80]))
  .map(([prefix, bad]) => Uint8Array.from([0x7b, ...prefix.filter((b) => b < 0x80), ...bad, 0x7d]));

/** Valid JSON text cut short (never the whole text). */
export function truncated(text: string): fc.Arbitrary<string> {
  return fc.integer({ min: 1, max: Math.max(1, text.length - 1) }).map((n) => text.slice(0, n));
}

/** A JSON body object with `__proto__`/`constructor` written as literal keys of the text. */
export function withProtoKey(valid: Record<string, unknown>): fc.Arbitrary<string> {
  return fc.constantFrom("__proto__", "constructor", "prototype").map((key) => JSON.stringify(valid).replace(/^\{/, `{"${key}":{"polluted":true},`));
}

/** Random query strings: unknown names, repeated names, hostile values, percent-encoding junk. */
export const hostileQueryPair: fc.Arbitrary<[string, string]> = fc.tuple(
  fc.oneof(fc.string({ minLength: 1, maxLength: 12 }), fc.constantFrom("__proto__", "constructor", "state[]", "sort%00", "limit")),
  fc.oneof(hostileString, fc.string({ maxLength: 30 }), hugeNumberText),
);

/** Encodes pairs as a query string (percent-encoded, so the URL stays parseable). */
export function queryString(pairs: [string, string][]): string {
  const enc = (t: string) => encodeURIComponent(t.replace(/[\uD800-\uDFFF]/g, "\uFFFD"));
  return pairs.length === 0 ? "" : `?${pairs.map(([k, v]) => `${enc(k)}=${enc(v)}`).join("&")}`;
}

/** Unicode-safe percent-encoding of a path segment, keeping it one segment. */
export function segment(text: string): string {
  return encodeURIComponent(text.replace(/[\uD800-\uDFFF]/g, "\uFFFD"));
}

/** Headers of a JSON request with a bearer token and a fresh client address. */
export function jsonHeaders(token: string, contentType: string | null = "application/json"): Record<string, string> {
  const headers: Record<string, string> = { authorization: `Bearer ${token}`, "cf-connecting-ip": "192.0.2.10" };
  if (contentType !== null) headers["content-type"] = contentType;
  return headers;
}

/**
 * Transport-level breakers every JSON route must refuse: wrong content type, invalid UTF-8, empty,
 * truncated JSON, not JSON at all, over the size limit.
 */
export function transportBreakers(method: string, path: fc.Arbitrary<string>, token: string, validText: string, limitBytes: number): fc.Arbitrary<FuzzRequest> {
  return fc.oneof(
    fc
      .record({ path, type: wrongContentType })
      .map(({ path: p, type }) => ({ method, path: p, headers: jsonHeaders(token, type), body: validText, broke: `content-type ${type}` })),
    fc.record({ path, bytes: invalidUtf8 }).map(({ path: p, bytes }) => ({ method, path: p, headers: jsonHeaders(token), body: bytes, broke: "invalid UTF-8" })),
    path.map((p) => ({ method, path: p, headers: jsonHeaders(token), body: "", broke: "empty body" })),
    fc.record({ path, text: truncated(validText) }).map(({ path: p, text }) => ({ method, path: p, headers: jsonHeaders(token), body: text, broke: "truncated JSON" })),
    fc.record({ path, text: fc.constantFrom("{'a':1}", "NaN", "undefined", "{a:1}", "[1,]", '{"a":1,}', "\u0000", "tru", '{"a" 1}', "0x10") }).map(({ path: p, text }) => ({
      method,
      path: p,
      headers: jsonHeaders(token),
      body: text,
      broke: "not JSON",
    })),
    fc.record({ path, extra: fc.integer({ min: 1, max: 4096 }) }).map(({ path: p, extra }) => ({
      method,
      path: p,
      headers: jsonHeaders(token),
      body: `{"pad":"${"x".repeat(limitBytes + extra)}"}`,
      broke: "oversized body",
    })),
  );
}
