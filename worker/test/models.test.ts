/**
 * Models in KV, in process (./in-process.ts, real local KV and D1): upload (verified by the core, immutable versions), list, read,
 * activate, roll back and shadow, each change logged in model_events with the admin's user name;
 * tampered artifacts refused at upload and never made live from KV; and KV failures with and
 * without a cached model.
 */
import { mkdtemp, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import type { ModelArtifact } from "../../shared-model/src";
import { eventually, publishModel, type RunningWorker } from "./harness";
import { startApp } from "./in-process";
import { fitShopModel, UNUSUAL_PAYMENT } from "./fixtures";

let first: ModelArtifact;
let second: ModelArtifact;
let third: ModelArtifact;

beforeAll(async () => {
  [first, second, third] = await Promise.all([
    fitShopModel({ version: "mkv-1", seed: 21 }),
    fitShopModel({ version: "mkv-2", seed: 22 }),
    fitShopModel({ version: "mkv-3", seed: 23 }),
  ]);
});

/** The artifact with its cutoff quietly raised and the checksum left as it was. */
function tampered(artifact: ModelArtifact): ModelArtifact {
  return { ...artifact, cutoff: { ...artifact.cutoff, mahalanobisSq: artifact.cutoff.mahalanobisSq * 100 } };
}

async function scoreVersion(worker: RunningWorker, id: string): Promise<{ status: number; version?: string; body: any }> {
  const response = await worker.post("/v1/score", { transactionId: id, features: UNUSUAL_PAYMENT, segment: "web" }, worker.tokens.flow);
  const body = (await response.json()) as any;
  return { status: response.status, version: body.modelVersion, body };
}

async function health(worker: RunningWorker): Promise<{ status: number; body: any }> {
  const response = await worker.fetch("/v1/health");
  return { status: response.status, body: await response.json() };
}

function putJson(worker: RunningWorker, path: string, body: unknown): Promise<Response> {
  return worker.fetch(path, { method: "PUT", headers: { "content-type": "application/json" }, body: JSON.stringify(body), token: worker.tokens.admin });
}

describe("admin routes", () => {
  let worker: RunningWorker;
  beforeAll(async () => {
    worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0" } });
  });
  afterAll(async () => {
    await worker?.dispose();
  });

  test("a tampered artifact is refused at upload with the checksum problem, and nothing is stored", async () => {
    const response = await worker.post("/v1/models", tampered(first), worker.tokens.admin);
    expect(response.status).toBe(422);
    const body = (await response.json()) as { error: string; problems: { field: string; rule: string }[] };
    expect(body.error).toBe("artifact-refused");
    expect(body.problems.some((p) => p.field === "checksum" && /altered after sealing/.test(p.rule))).toBe(true);
    const kv = await worker.kv();
    expect(await kv.get("model:mkv-1", "text")).toBeNull();
    const db = await worker.db();
    expect(await db.prepare("SELECT COUNT(*) AS n FROM model_events").first<{ n: number }>()).toEqual({ n: 0 });
  });

  test("an upload that is not an artifact lists the schema problems by path", async () => {
    const { checksum: _c, ...withoutChecksum } = first;
    const response = await worker.post("/v1/models", { ...withoutChecksum, colour: "teal" }, worker.tokens.admin);
    expect(response.status).toBe(422);
    const fields = ((await response.json()) as { problems: { field: string }[] }).problems.map((p) => p.field);
    expect(fields).toContain("checksum");
    expect(fields).toContain("colour");
  });

  test("versions are immutable: the same artifact again is accepted as identical, other content under the version is a 409", async () => {
    expect((await worker.post("/v1/models", first, worker.tokens.admin)).status).toBe(201);
    const again = await worker.post("/v1/models", first, worker.tokens.admin);
    expect(again.status).toBe(200);
    expect(await again.json()).toEqual({ version: "mkv-1", stored: false, identical: true });
    const impostor = await fitShopModel({ version: "mkv-1", seed: 99 });
    const conflict = await worker.post("/v1/models", impostor, worker.tokens.admin);
    expect(conflict.status).toBe(409);
    const body = (await conflict.json()) as { error: string; problems: { field: string; rule: string }[] };
    expect(body.error).toBe("version-exists");
    expect(body.problems[0].field).toBe("version");
    expect(body.problems[0].rule).toContain(first.checksum);
    const stored = JSON.parse((await (await worker.kv()).get("model:mkv-1", "text"))!) as ModelArtifact;
    expect(stored.checksum).toBe(first.checksum);
  });

  test("activate, list, read, shadow and roll back move the pointer and log each change with its admin", async () => {
    await publishModel(worker, first);
    await publishModel(worker, second, false);
    await publishModel(worker, third, false);
    const activated = await worker.post("/v1/models/mkv-2/activate", {}, worker.tokens.admin);
    expect(activated.status).toBe(200);
    expect(((await activated.json()) as any).pointer).toMatchObject({ version: "mkv-2", shadow: null, previous: ["mkv-1"], updatedBy: "ops-ana" });
    expect((await scoreVersion(worker, "adm-1")).version).toBe("mkv-2");

    expect((await putJson(worker, "/v1/models/shadow", { version: "mkv-2" })).status).toBe(409);
    expect((await putJson(worker, "/v1/models/shadow", { version: "mkv-9" })).status).toBe(404);
    expect((await putJson(worker, "/v1/models/shadow", { version: "mkv-3" })).status).toBe(200);

    const list = (await (await worker.fetch("/v1/models", { token: worker.tokens.admin })).json()) as any;
    expect(list.pointer).toMatchObject({ version: "mkv-2", shadow: "mkv-3" });
    const byVersion = Object.fromEntries(list.models.map((m: any) => [m.version, m]));
    expect(Object.keys(byVersion).sort()).toEqual(["mkv-1", "mkv-2", "mkv-3"]);
    expect(byVersion["mkv-2"]).toMatchObject({ active: true, shadow: false, estimator: "classical", covarianceShape: "full", segmentBy: "channel" });
    expect(byVersion["mkv-3"]).toMatchObject({ active: false, shadow: true });
    expect(byVersion["mkv-1"].columns).toEqual(first.columns);
    expect(byVersion["mkv-1"].cutoff.mahalanobisSq).toBe(first.cutoff.mahalanobisSq);
    expect(byVersion["mkv-1"].createdAt).toBe(first.createdAt);

    const one = (await (await worker.fetch("/v1/models/mkv-3", { token: worker.tokens.admin })).json()) as any;
    expect(one).toMatchObject({ version: "mkv-3", active: false, shadow: true });
    expect(one.artifact).toEqual(third);
    expect((await worker.fetch("/v1/models/mkv-404", { token: worker.tokens.admin })).status).toBe(404);
    expect((await worker.post("/v1/models/mkv-404/activate", {}, worker.tokens.admin)).status).toBe(404);

    const promoted = await worker.post("/v1/models/mkv-3/activate", {}, worker.tokens.admin);
    expect(((await promoted.json()) as any).pointer).toMatchObject({ version: "mkv-3", shadow: null, previous: ["mkv-2", "mkv-1"] });
    const back = await worker.post("/v1/models/rollback", {}, worker.tokens.admin);
    expect(((await back.json()) as any).pointer).toMatchObject({ version: "mkv-2", previous: ["mkv-1"] });
    expect((await scoreVersion(worker, "adm-2")).version).toBe("mkv-2");
    expect((await worker.post("/v1/models/rollback", {}, worker.tokens.admin)).status).toBe(200);
    const none = await worker.post("/v1/models/rollback", {}, worker.tokens.admin);
    expect(none.status).toBe(409);
    expect(((await none.json()) as any).error).toBe("no-previous-version");
    expect((await scoreVersion(worker, "adm-3")).version).toBe("mkv-1");

    const db = await worker.db();
    const { results } = await db.prepare("SELECT actor, action, from_version, to_version, outcome FROM model_events ORDER BY id").all<Record<string, string | null>>();
    expect(results.map((r) => [r.action, r.from_version, r.to_version])).toEqual([
      ["upload", null, "mkv-1"],
      ["activate", null, "mkv-1"],
      ["upload", null, "mkv-2"],
      ["upload", null, "mkv-3"],
      ["activate", "mkv-1", "mkv-2"],
      ["shadow-set", null, "mkv-3"],
      ["activate", "mkv-2", "mkv-3"],
      ["rollback", "mkv-3", "mkv-2"],
      ["rollback", "mkv-2", "mkv-1"],
    ]);
    expect(new Set(results.map((r) => r.actor))).toEqual(new Set(["ops-ana"]));
    expect(new Set(results.map((r) => r.outcome))).toEqual(new Set(["applied"]));
  });

  test("a list cursor that is not shaped like one is refused naming the cursor", async () => {
    for (const cursor of ["not a cursor", "x".repeat(1025), "<script>"]) {
      const response = await worker.fetch(`/v1/models?cursor=${encodeURIComponent(cursor)}`, { token: worker.tokens.admin });
      expect(response.status, cursor).toBe(400);
      expect(await response.json()).toEqual({ error: "invalid-request", problems: [{ field: "cursor", rule: "must be the cursor of a previous page of this list" }] });
    }
  });

  test("a model change that cannot be logged is not made", async () => {
    const db = await worker.db();
    await db.exec("ALTER TABLE model_events RENAME TO model_events_away");
    try {
      const response = await worker.post("/v1/models/mkv-2/activate", {}, worker.tokens.admin);
      expect(response.status).toBe(503);
      expect(((await response.json()) as any).error).toBe("event-log-unavailable");
      const pointer = JSON.parse((await (await worker.kv()).get("pointer:active", "text"))!);
      expect(pointer.version).toBe("mkv-1");
    } finally {
      await db.exec("ALTER TABLE model_events_away RENAME TO model_events");
    }
  });
});

describe("KV failures with a cached model", () => {
  let worker: RunningWorker;
  let stateDir: string;
  beforeAll(async () => {
    stateDir = await mkdtemp(join(tmpdir(), "isodense-kv-"));
    worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0" }, persistDir: stateDir });
    await publishModel(worker, first);
    expect((await scoreVersion(worker, "kv-warm")).version).toBe("mkv-1");
  });
  afterAll(async () => {
    await worker?.dispose();
    await rm(stateDir, { recursive: true, force: true });
  });

  test("a tampered artifact written straight into KV and pointed at never becomes live", async () => {
    const kv = await worker.kv();
    await kv.put("model:mkv-evil", JSON.stringify({ ...tampered(second), version: "mkv-evil" }));
    await kv.put("pointer:active", JSON.stringify({ version: "mkv-evil", shadow: null, previous: ["mkv-1"], updatedAt: "2026-03-02T10:00:00.000Z", updatedBy: "nobody" }));
    for (let i = 0; i < 3; i++) expect((await scoreVersion(worker, `kv-evil-${i}`)).version).toBe("mkv-1");
    const h = await health(worker);
    expect(h.status).toBe(200);
    expect(h.body.model.version).toBe("mkv-1");
    expect(h.body.pointer.version).toBe("mkv-evil");
    expect(h.body.lastFailure.code).toBe("artifact-invalid");
    expect(h.body.loadFailures).toBeGreaterThanOrEqual(3);
    const activation = await worker.post("/v1/models/mkv-evil/activate", {}, worker.tokens.admin);
    expect(activation.status).toBe(422);
    // Logged once, however many requests saw the failure.
    const output = worker.logs
      .filter((l) => l.level === "stderr" || l.level === "stdout")
      .map((l) => l.message)
      .join("");
    expect(output.split('"event":"model-load-failed"').length - 1).toBe(1);
    expect(output).toContain("model:mkv-evil does not verify");
  });

  test("a pointer naming a version that is not stored keeps the last good model serving", async () => {
    const kv = await worker.kv();
    await kv.put("pointer:active", JSON.stringify({ version: "mkv-gone", shadow: null, previous: [], updatedAt: "2026-03-02T10:00:00.000Z", updatedBy: "nobody" }));
    expect((await scoreVersion(worker, "kv-gone")).version).toBe("mkv-1");
    expect((await health(worker)).body.lastFailure.code).toBe("artifact-missing");
  });

  test("a pointer that is not JSON keeps the last good model serving", async () => {
    const kv = await worker.kv();
    await kv.put("pointer:active", "{not json");
    expect((await scoreVersion(worker, "kv-garbled")).version).toBe("mkv-1");
    expect((await health(worker)).body.lastFailure.code).toBe("pointer-invalid");
  });

  test("KV storage that loses its data files underneath keeps the last good model serving", async () => {
    const kv = await worker.kv();
    await kv.put("pointer:active", JSON.stringify({ version: "mkv-1", shadow: null, previous: [], updatedAt: "2026-03-02T10:00:00.000Z", updatedBy: "ops-ana" }));
    expect((await scoreVersion(worker, "kv-before")).version).toBe("mkv-1");
    // The local KV keeps values as files under <persist>/MODELS/blobs: replace that folder by a file.
    await rm(join(stateDir, "kv", "MODELS", "blobs"), { recursive: true, force: true });
    await writeFile(join(stateDir, "kv", "MODELS", "blobs"), "not a folder");
    const failuresBefore = (await health(worker)).body.loadFailures;
    const scored = await scoreVersion(worker, "kv-broken");
    expect(scored.status).toBe(200);
    expect(scored.version).toBe("mkv-1");
    expect(scored.body.decision).toBe("review");
    const h = await health(worker);
    expect(h.body.loadFailures).toBeGreaterThan(failuresBefore);
    expect(h.body.model.version).toBe("mkv-1");
  });
});

describe("first model after an activation", () => {
  test("calls arriving while the isolate loads it wait for the load instead of answering no-model", async () => {
    const worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "60" } });
    try {
      // The isolate looks for a model once and finds none, so it would not look again for a second.
      expect((await scoreVersion(worker, "first-0")).status).toBe(503);
      await publishModel(worker, first);
      // The activation invalidates this isolate's cache: the first call starts the load, the others
      // arrive while it reads and verifies the artifact.
      const burst = await Promise.all(Array.from({ length: 24 }, (_, i) => scoreVersion(worker, `first-${i + 1}`)));
      expect(burst.map((b) => b.status)).toEqual(burst.map(() => 200));
      expect(new Set(burst.map((b) => b.version))).toEqual(new Set(["mkv-1"]));
    } finally {
      await worker.dispose();
    }
  });
});

describe("KV failures without a cached model", () => {
  test("with nothing loadable the flow gets a 503 it can act on, and scoring starts once a good model is stored", async () => {
    const worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "7" } });
    try {
      const empty = await worker.post("/v1/score", { transactionId: "cold-0", features: UNUSUAL_PAYMENT }, worker.tokens.flow);
      expect(empty.status).toBe(503);
      const kv = await worker.kv();
      await kv.put("model:mkv-2", JSON.stringify(tampered(second)));
      await kv.put("pointer:active", JSON.stringify({ version: "mkv-2", shadow: null, previous: [], updatedAt: "2026-03-02T10:00:00.000Z", updatedBy: "nobody" }));
      // Without a model the cache reads the pointer at most once a second (scoring/model-cache.ts):
      // wait until it has read this one and failed on its artifact.
      await eventually(async () => ((await health(worker)).body.lastFailure?.code === "artifact-invalid" ? true : undefined), 15_000);
      const refused = await worker.post("/v1/score", { transactionId: "cold-1", features: UNUSUAL_PAYMENT }, worker.tokens.flow);
      expect(refused.status).toBe(503);
      expect(refused.headers.get("retry-after")).toBe("7");
      expect(await refused.json()).toEqual({
        error: "no-model",
        problems: [{ field: "model", rule: "no model is loaded: none has been activated, or KV cannot be read; retry after the Retry-After seconds" }],
        retryable: true,
      });
      const h = await health(worker);
      expect(h.status).toBe(503);
      expect(h.body).toMatchObject({ status: "no-model", model: null, pointer: { version: "mkv-2" } });
      expect(h.body.lastFailure.code).toBe("artifact-invalid");
      await kv.put("pointer:active", JSON.stringify({ version: "mkv-missing", shadow: null, previous: [], updatedAt: "2026-03-02T10:00:00.000Z", updatedBy: "nobody" }));
      await eventually(async () => ((await health(worker)).body.lastFailure?.code === "artifact-missing" ? true : undefined), 15_000);
      expect((await scoreVersion(worker, "cold-2")).status).toBe(503);
      await publishModel(worker, first);
      const recovered = await scoreVersion(worker, "cold-3");
      expect(recovered.status).toBe(200);
      expect(recovered.version).toBe("mkv-1");
    } finally {
      await worker.dispose();
    }
  });
});
