/**
 * What the model-route fuzz suites (worker/test/fuzz-models-*.test.ts) share: the app each file
 * starts with two stored versions of its own, and the generators of broken requests. Uploads are a
 * real sealed artifact with one definite defect (a value changed, a key removed or added, a
 * `__proto__` key, truncated, the wrong transport); the routes with a version in the path get
 * hostile or unknown versions. The suites are split so that vitest runs them side by side (files
 * run in parallel, the tests inside a file in sequence).
 */
import fc from "fast-check";
import { afterAll, beforeAll, expect } from "vitest";
import { fitShopModel } from "./fixtures";
import {
  deepNesting,
  deepNestingUpTo,
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

/** The versions each suite stores: live, and a spare that was never active. */
const STORED = new Set(["mfuzz-live", "mfuzz-spare"]);

/** A suite's running app, the artifact it uploads broken, and the check that nothing changed. */
export interface ModelFuzzApp {
  /** The in-process app (read it inside a test: it is set once `beforeAll` has run). */
  readonly worker: RunningWorker;
  /** A sealed artifact under a version that is not stored: any accepted upload would store it. */
  readonly candidate: Record<string, unknown>;
  /** Fails unless the active pointer, every D1 table's row count (versions, event log) and the KV key count are as before. */
  expectNothingChanged(): Promise<void>;
}

/**
 * Registers the suite's `beforeAll` and `afterAll`: an in-process app with `mfuzz-live` active and
 * `mfuzz-spare` stored, a candidate artifact, and the counts of everything stored.
 *
 * @example
 * const app = modelFuzzApp();
 * test("…", async () => fuzzEndpoint(app.worker, "POST /v1/models", uploadRequests(app.candidate, app.worker.tokens.admin)));
 */
export function modelFuzzApp(): ModelFuzzApp {
  let worker: RunningWorker | undefined;
  let candidate: Record<string, unknown> | undefined;
  let before: Record<string, number> | undefined;
  let pointerBefore: string | null = null;
  beforeAll(async () => {
    const started = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0" } });
    worker = started;
    await publishModel(started, await fitShopModel({ version: "mfuzz-live" }));
    await publishModel(started, await fitShopModel({ version: "mfuzz-spare", seed: 4 }), false);
    candidate = (await fitShopModel({ version: "mfuzz-candidate", seed: 9, rows: 600 })) as unknown as Record<string, unknown>;
    before = await storedCounts(started);
    pointerBefore = await (await started.kv()).get("pointer:active", "text");
  });
  afterAll(async () => {
    await worker?.dispose();
  });
  const ready = <T>(value: T | undefined): T => {
    if (value === undefined) throw new Error("the model fuzz app is not started: read it inside a test");
    return value;
  };
  return {
    get worker() {
      return ready(worker);
    },
    get candidate() {
      return ready(candidate);
    },
    async expectNothingChanged() {
      expect(before, "the counts taken before the fuzzing").toBeDefined();
      expect(await (await ready(worker).kv()).get("pointer:active", "text")).toBe(pointerBefore);
      expect(await storedCounts(ready(worker))).toEqual(before);
    },
  };
}

/** Every path to a leaf (or an array/object node) of the artifact, as key lists. */
function pathsOf(value: unknown, prefix: (string | number)[] = [], out: (string | number)[][] = []): (string | number)[][] {
  if (prefix.length > 0) out.push(prefix);
  if (Array.isArray(value)) value.forEach((v, i) => (i < 6 ? pathsOf(v, [...prefix, i], out) : undefined));
  else if (value && typeof value === "object") for (const [k, v] of Object.entries(value)) pathsOf(v, [...prefix, k], out);
  return out;
}

/** A copy of `root` with the node at `path` replaced by `replacement`, or removed. */
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

/** Uploads of `candidate` (sealed, not stored) with one definite defect, or broken in transport. */
export function uploadRequests(candidate: Record<string, unknown>, token: string): fc.Arbitrary<FuzzRequest> {
  const candidateText = JSON.stringify(candidate);
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
export const unknownVersion: fc.Arbitrary<string> = fc
  .oneof(
    hostileString,
    fc.string({ minLength: 1, maxLength: 200 }),
    fc.stringMatching(/^m[a-z0-9-]{1,20}$/),
    fc.constantFrom("..", ".", "%2e%2e", "pointer:active", "model:mfuzz-live", " mfuzz-live", "mfuzz-live "),
  )
  .filter((v) => v.length > 0 && !STORED.has(v));

/** Requests to `/v1/models/{version}{suffix}` with a version that is not stored and a hostile query. */
export function versionPathRequests(method: string, suffix: string, token: string): fc.Arbitrary<FuzzRequest> {
  return fc.record({ version: unknownVersion, query: fc.array(hostileQueryPair, { maxLength: 2 }) }).map(({ version, query }) => ({
    method,
    path: `/v1/models/${segment(version)}${suffix}${queryString(query)}`,
    headers: jsonHeaders(token),
    body: method === "POST" ? "{}" : undefined,
    broke: `version ${JSON.stringify(version)}`,
  }));
}

/** Shadow requests broken in one definite way (unknown or live version, bad body, transport). */
export function shadowRequests(token: string): fc.Arbitrary<FuzzRequest> {
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

/** Rollback requests with any body and hostile queries (while no earlier version exists). */
export function rollbackRequests(token: string): fc.Arbitrary<FuzzRequest> {
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

/** List requests with hostile cursors and parameters. */
export function listRequests(token: string): fc.Arbitrary<FuzzRequest> {
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
