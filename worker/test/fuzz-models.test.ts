/**
 * Fuzzing the admin model routes in process (./in-process.ts): FUZZ_RUNS (10,000) hostile requests to each of
 * upload, list, read one, activate, rollback and shadow. Uploads are a real sealed artifact with one
 * definite defect (a value changed, a key removed or added, a `__proto__` key, truncated, the wrong
 * transport); the routes with a version in the path get hostile or unknown versions. Every answer
 * must be a 4xx naming the field and the rule (list and read-one may answer 200 where the input is
 * merely ignored or names a stored version), never a 5xx; the active pointer, the stored versions
 * and the model event log must be exactly as before.
 */
import fc from "fast-check";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { fitShopModel } from "./fixtures";
import {
  deepNesting,
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
import { publishModel, type RunningWorker } from "./harness";
import { startApp } from "./in-process";
import { storedCounts } from "./stored-counts";

let worker: RunningWorker;
let before: Record<string, number>;
let pointerBefore: string | null;
let candidate: Record<string, unknown>;
let candidateText: string;
const STORED = new Set(["mfuzz-live", "mfuzz-spare"]);

beforeAll(async () => {
  worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0" } });
  await publishModel(worker, await fitShopModel({ version: "mfuzz-live" }));
  await publishModel(worker, await fitShopModel({ version: "mfuzz-spare", seed: 4 }), false);
  // A sealed artifact under a version that is not stored: any accepted upload would store it.
  candidate = (await fitShopModel({ version: "mfuzz-candidate", seed: 9, rows: 600 })) as unknown as Record<string, unknown>;
  candidateText = JSON.stringify(candidate);
  before = await storedCounts(worker);
  pointerBefore = await (await worker.kv()).get("pointer:active", "text");
});
afterAll(async () => {
  await worker?.dispose();
});

/** Every path to a leaf (or an array/object node) of the artifact, as key lists. */
function pathsOf(value: unknown, prefix: (string | number)[] = [], out: (string | number)[][] = []): (string | number)[][] {
  if (prefix.length > 0) out.push(prefix);
  if (Array.isArray(value)) value.forEach((v, i) => (i < 6 ? pathsOf(v, [...prefix, i], out) : undefined));
  else if (value && typeof value === "object") for (const [k, v] of Object.entries(value)) pathsOf(v, [...prefix, k], out);
  return out;
}

function setAt(root: unknown, path: (string | number)[], replacement: unknown, remove = false): unknown {
  const copy = structuredClone(root) as Record<string | number, unknown>;
  let node = copy as Record<string | number, unknown>;
  for (const key of path.slice(0, -1)) node = node[key] as Record<string | number, unknown>;
  const last = path[path.length - 1];
  if (remove) {
    if (Array.isArray(node)) node.splice(Number(last), 1);
    else delete node[last];
  } else node[last] = replacement;
  return copy;
}

function uploadRequests(token: string): fc.Arbitrary<FuzzRequest> {
  const paths = pathsOf(candidate);
  const at = (body: string, broke: string): FuzzRequest => ({ method: "POST", path: "/v1/models", headers: jsonHeaders(token), body, broke });
  const changed = fc
    .record({ path: fc.constantFrom(...paths), value: fc.oneof(fc.jsonValue({ maxDepth: 2 }), hostileString, fc.double()) })
    .map(({ path, value }) => ({ path, text: JSON.stringify(setAt(candidate, path, value)) }))
    .filter(({ text }) => text !== candidateText)
    .map(({ path, text }) => at(text, `changed ${path.join(".")}`));
  const removed = fc.constantFrom(...paths).map((path) => at(JSON.stringify(setAt(candidate, path, null, true)), `removed ${path.join(".")}`));
  const added = fc
    .record({ key: fc.string({ minLength: 1, maxLength: 12 }).filter((k) => !(k in candidate)), value: fc.jsonValue({ maxDepth: 1 }) })
    .map(({ key, value }) => at(JSON.stringify({ ...candidate, [key]: value }), `added ${key}`));
  return fc.oneof(
    { weight: 4, arbitrary: changed },
    { weight: 2, arbitrary: removed },
    { weight: 1, arbitrary: added },
    { weight: 1, arbitrary: withProtoKey(candidate).map((text) => at(text, "__proto__ key")) },
    {
      weight: 1,
      arbitrary: fc
        .oneof(
          fc.jsonValue({ maxDepth: 2 }).filter((v) => typeof v !== "object" || v === null || Array.isArray(v)),
          deepNesting,
        )
        .map((v) => at(typeof v === "string" && v.startsWith("[") ? v : JSON.stringify(v), "not an artifact object")),
    },
    { weight: 2, arbitrary: transportBreakers("POST", fc.constant("/v1/models"), token, candidateText, 5 * 1024 * 1024 - candidateText.length + 2) },
  );
}

/** A version that is not stored: hostile strings, over-long, path tricks, unknown plain ones. */
const unknownVersion: fc.Arbitrary<string> = fc
  .oneof(
    hostileString,
    fc.string({ minLength: 1, maxLength: 200 }),
    fc.stringMatching(/^m[a-z0-9-]{1,20}$/),
    fc.constantFrom("..", ".", "%2e%2e", "pointer:active", "model:mfuzz-live", " mfuzz-live", "mfuzz-live "),
  )
  .filter((v) => v.length > 0 && !STORED.has(v));

function versionPathRequests(method: string, suffix: string, token: string): fc.Arbitrary<FuzzRequest> {
  return fc.record({ version: unknownVersion, query: fc.array(hostileQueryPair, { maxLength: 2 }) }).map(({ version, query }) => ({
    method,
    path: `/v1/models/${segment(version)}${suffix}${queryString(query)}`,
    headers: jsonHeaders(token),
    body: method === "POST" ? "{}" : undefined,
    broke: `version ${JSON.stringify(version)}`,
  }));
}

function shadowRequests(token: string): fc.Arbitrary<FuzzRequest> {
  const at = (body: string, broke: string): FuzzRequest => ({ method: "PUT", path: "/v1/models/shadow", headers: jsonHeaders(token), body, broke });
  return fc.oneof(
    unknownVersion.map((v) => at(JSON.stringify({ version: v }), "unknown version")),
    notAString.filter((v) => v !== null).map((v) => at(JSON.stringify({ version: v }), "version not a string")),
    fc.constant(at(JSON.stringify({ version: "mfuzz-live" }), "the live version")),
    fc
      .string({ minLength: 1, maxLength: 10 })
      .filter((k) => k !== "version")
      .map((k) => at(JSON.stringify({ version: null, [k]: 1 }), "unknown key")),
    fc.constant(at("{}", "version missing")),
    withProtoKey({ version: null }).map((text) => at(text, "__proto__ key")),
    deepNestingUpTo(3_800).map((text) => at(`{"version":${text}}`, "deeply nested version")),
    transportBreakers("PUT", fc.constant("/v1/models/shadow"), token, JSON.stringify({ version: null }), 4 * 1024),
  );
}

function rollbackRequests(token: string): fc.Arbitrary<FuzzRequest> {
  return fc
    .record({
      body: fc.option(
        fc.oneof(
          fc.jsonValue({ maxDepth: 2 }).map((v) => JSON.stringify(v)),
          deepNesting,
        ),
      ),
      query: fc.array(hostileQueryPair, { maxLength: 2 }),
    })
    .map(({ body, query }) => ({
      method: "POST",
      path: `/v1/models/rollback${queryString(query)}`,
      headers: jsonHeaders(token),
      body: body ?? undefined,
      broke: "rollback with no earlier version",
    }));
}

function listRequests(token: string): fc.Arbitrary<FuzzRequest> {
  return fc
    .record({
      cursor: fc.option(fc.oneof(hostileString, fc.string({ maxLength: 40 }), fc.stringMatching(/^[A-Za-z0-9]{1,40}$/))),
      query: fc.array(hostileQueryPair, { maxLength: 3 }),
    })
    .map(({ cursor, query }) => ({
      method: "GET",
      path: `/v1/models${queryString(cursor === null ? query : [["cursor", cursor], ...query])}`,
      headers: jsonHeaders(token),
      broke: "hostile list query",
    }));
}

const okOr4xx = (s: number) => s === 200 || (s >= 400 && s < 500);

describe("fuzzing the model routes", { timeout: 600_000 }, () => {
  test("POST /v1/models refuses every artifact with a defect, naming the field and the rule", async () => {
    await fuzzEndpoint(worker, "POST /v1/models", uploadRequests(worker.tokens.admin));
  });

  test("GET /v1/models answers hostile cursors and parameters with a page or a 4xx, never a 5xx", async () => {
    await fuzzEndpoint(worker, "GET /v1/models", listRequests(worker.tokens.admin), { allowed: okOr4xx });
  });

  test("GET /v1/models/{version} refuses hostile and unknown versions", async () => {
    await fuzzEndpoint(worker, "GET /v1/models/{version}", versionPathRequests("GET", "", worker.tokens.admin));
  });

  test("POST /v1/models/{version}/activate refuses hostile and unknown versions", async () => {
    await fuzzEndpoint(worker, "POST /v1/models/{version}/activate", versionPathRequests("POST", "/activate", worker.tokens.admin));
  });

  test("POST /v1/models/rollback refuses every attempt while there is no earlier version", async () => {
    await fuzzEndpoint(worker, "POST /v1/models/rollback", rollbackRequests(worker.tokens.admin));
  });

  test("PUT /v1/models/shadow refuses every hostile body", async () => {
    await fuzzEndpoint(worker, "PUT /v1/models/shadow", shadowRequests(worker.tokens.admin));
  });

  test("the pointer, the stored versions and the event log are exactly as before", async () => {
    expect(await (await worker.kv()).get("pointer:active", "text")).toBe(pointerBefore);
    expect(await storedCounts(worker)).toEqual(before);
  });
});
