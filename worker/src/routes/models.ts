/**
 * Admin routes for models in KV: upload (immutable versions), list, read, activate, roll back,
 * the shadow, and the reports `isodense renew` files beside the candidates it stores. Every change
 * is recorded in `model_events` before it is made (see `storage/review-store.ts`), and this isolate's cache is refreshed at once; other isolates follow
 * within MODEL_REFRESH_SECONDS plus KV propagation.
 */
import { Hono, type Context } from "hono";
import { ArtifactError, parseArtifact, type ModelArtifact } from "../../../shared-model/src";
import { renewReportSchema } from "../../../shared-model/src/renew-report";
import type { AppEnv } from "../app-env";
import { allow, authenticate } from "../middleware/auth";
import { BODY_LIMITS, jsonBody } from "../middleware/json-body";
import { problemResponse } from "../problems";
import { changePointer, loadModel, ModelLoadError } from "../scoring/model-cache";
import { activatedPointer, listVersions, readArtifactText, readPointer, storeArtifact, type VersionPage } from "../storage/model-store";
import { fileRenewReport } from "../storage/renew-store";
import { markModelEventFailed, recordModelEvent, type ModelEventAction } from "../storage/review-store";
import {
  shadowRequestSchema,
  versionParamSchema,
  type ModelList,
  type ModelPointer,
  type ModelSummary,
  type PointerChange,
  type RenewFiling,
  type StoredModel,
  type UploadAnswer,
} from "../contract";
import { parseBody, parseValue } from "./validate";

/** Model routes, mounted under `/v1`. Admin only. */
export const modelRoutes = new Hono<AppEnv>();

// "/models/*" also matches "/models" itself in Hono, so one registration covers every route here.
modelRoutes.use("/models/*", authenticate(), allow("admin"));

/** Versions per page of `GET /v1/models`. */
const PAGE_SIZE = 50;

modelRoutes.post("/models", jsonBody(BODY_LIMITS.artifact), async (c) => {
  const body = c.get("body");
  let artifact: ModelArtifact;
  try {
    artifact = await parseArtifact(body);
  } catch (error) {
    if (error instanceof ArtifactError) {
      return problemResponse(
        c,
        422,
        "artifact-refused",
        error.problems.map((p) => ({ field: p.path, rule: p.rule })),
      );
    }
    throw error;
  }
  const versionCheck = versionParamSchema.safeParse(artifact.version);
  if (!versionCheck.success) {
    return problemResponse(c, 422, "artifact-refused", [{ field: "version", rule: `${versionCheck.error.issues[0].message}. Actual: ${JSON.stringify(artifact.version)}` }]);
  }
  const existingText = await readArtifactText(c.env, artifact.version);
  if (existingText !== null) {
    const existingChecksum = checksumOf(existingText);
    if (existingChecksum === artifact.checksum) return c.json({ version: artifact.version, stored: false, identical: true } satisfies UploadAnswer, 200);
    return problemResponse(c, 409, "version-exists", [
      {
        field: "version",
        rule: `${artifact.version} is already stored with other content (checksum ${existingChecksum ?? "unreadable"}, uploaded ${artifact.checksum}); versions are immutable, publish under a new version`,
      },
    ]);
  }
  const principal = c.get("principal");
  return changeWithEvent(c, { action: "upload", fromVersion: null, toVersion: artifact.version, detail: artifact.checksum }, async () => {
    await storeArtifact(c.env, artifact.version, JSON.stringify(body), { createdAt: artifact.createdAt, checksum: artifact.checksum });
    return c.json({ version: artifact.version, stored: true, identical: false, uploadedBy: principal.user } satisfies UploadAnswer, 201);
  });
});

modelRoutes.get("/models", async (c) => {
  const cursor = c.req.query("cursor") ?? null;
  if (cursor !== null && !/^[A-Za-z0-9_=+/.-]{1,1024}$/.test(cursor)) {
    return problemResponse(c, 400, "invalid-request", [{ field: "cursor", rule: "must be the cursor of a previous page of this list" }]);
  }
  const pointer = await readPointer(c.env);
  let page: VersionPage;
  try {
    page = await listVersions(c.env, PAGE_SIZE, cursor);
  } catch (error) {
    // KV rejects a cursor it did not issue; without a cursor the failure is KV's own (500).
    if (cursor === null) throw error;
    return problemResponse(c, 400, "invalid-request", [{ field: "cursor", rule: "must be the cursor of a previous page of this list" }]);
  }
  const models = await Promise.all(
    page.versions.map(async (version) => {
      const text = await readArtifactText(c.env, version);
      return text === null ? null : summarize(version, text, pointer);
    }),
  );
  return c.json({ pointer, models: models.filter((m) => m !== null), cursor: page.cursor } satisfies ModelList);
});

modelRoutes.post("/models/rollback", async (c) => {
  const pointer = await readPointer(c.env);
  if (pointer === null || pointer.previous.length === 0) {
    return problemResponse(c, 409, "no-previous-version", [{ field: "pointer.previous", rule: "there is no earlier active version to roll back to" }]);
  }
  const [target, ...rest] = pointer.previous;
  const unusable = await verifyStored(c, target, "pointer.previous[0]");
  if (unusable) return unusable;
  const next: ModelPointer = {
    version: target,
    shadow: pointer.shadow === target ? null : pointer.shadow,
    previous: rest,
    updatedAt: new Date().toISOString(),
    updatedBy: c.get("principal").user,
  };
  return changeWithEvent(c, { action: "rollback", fromVersion: pointer.version, toVersion: target }, async () => {
    await changePointer(c.env, next);
    return c.json({ pointer: next, changed: true } satisfies PointerChange);
  });
});

modelRoutes.put("/models/shadow", jsonBody(BODY_LIMITS.small), async (c) => {
  const body = parseBody(c, shadowRequestSchema);
  if (body instanceof Response) return body;
  const wanted = body.version;
  const pointer = await readPointer(c.env);
  if (pointer === null) {
    return problemResponse(c, 409, "no-active-model", [{ field: "version", rule: "a shadow scores beside the live model; activate a model first" }]);
  }
  if (wanted !== null) {
    const badParam = checkVersionParam(c, wanted, "version");
    if (badParam) return badParam;
    if (wanted === pointer.version) {
      return problemResponse(c, 409, "shadow-is-live", [{ field: "version", rule: `${wanted} is the live version; a shadow must differ from it` }]);
    }
    const unusable = await verifyStored(c, wanted, "version");
    if (unusable) return unusable;
  }
  if (pointer.shadow === wanted) return c.json({ pointer, changed: false } satisfies PointerChange);
  const next: ModelPointer = { ...pointer, shadow: wanted, updatedAt: new Date().toISOString(), updatedBy: c.get("principal").user };
  const action: ModelEventAction = wanted === null ? "shadow-clear" : "shadow-set";
  return changeWithEvent(c, { action, fromVersion: pointer.shadow, toVersion: wanted }, async () => {
    await changePointer(c.env, next);
    return c.json({ pointer: next, changed: true } satisfies PointerChange);
  });
});

modelRoutes.get("/models/:version", async (c) => {
  const version = c.req.param("version");
  const badParam = checkVersionParam(c, version, "version");
  if (badParam) return badParam;
  const text = await readArtifactText(c.env, version);
  if (text === null) return notStored(c, version, "version");
  const pointer = await readPointer(c.env);
  const answer = { version, active: pointer?.version === version, shadow: pointer?.shadow === version, artifact: JSON.parse(text) as StoredModel["artifact"] };
  return c.json(answer satisfies StoredModel);
});

modelRoutes.post("/models/:version/activate", async (c) => {
  const version = c.req.param("version");
  const badParam = checkVersionParam(c, version, "version");
  if (badParam) return badParam;
  const unusable = await verifyStored(c, version, "version");
  if (unusable) return unusable;
  const pointer = await readPointer(c.env);
  if (pointer?.version === version) return c.json({ pointer, changed: false } satisfies PointerChange);
  const next = activatedPointer(pointer, version, c.get("principal").user);
  return changeWithEvent(c, { action: "activate", fromVersion: pointer?.version ?? null, toVersion: version }, async () => {
    await changePointer(c.env, next);
    return c.json({ pointer: next, changed: true } satisfies PointerChange);
  });
});

modelRoutes.post("/models/:version/renew-report", jsonBody(BODY_LIMITS.renewReport), async (c) => {
  const version = c.req.param("version");
  const badParam = checkVersionParam(c, version, "version");
  if (badParam) return badParam;
  const report = parseBody(c, renewReportSchema);
  if (report instanceof Response) return report;
  if (report.candidateVersion !== version) {
    return problemResponse(c, 422, "report-mismatch", [
      { field: "candidateVersion", rule: `must be the version in the path (${version}). Actual: ${JSON.stringify(report.candidateVersion)}` },
    ]);
  }
  if (report.outcome === "unchanged") {
    return problemResponse(c, 422, "report-mismatch", [
      { field: "outcome", rule: "a report is filed for a candidate published as the shadow or held back; 'unchanged' sends nothing" },
    ]);
  }
  const unusable = await verifyStored(c, version, "version");
  if (unusable) return unusable;
  const filed = await fileRenewReport(c.env, c.get("principal").user, report);
  return c.json({ version, outcome: report.outcome, filed } satisfies RenewFiling, filed ? 201 : 200);
});

/**
 * Records the event, then makes the change; if the change throws, the event is marked failed and
 * the error goes on to `onError` (500). If the event cannot be recorded, nothing changes (503).
 */
async function changeWithEvent(
  c: Context<AppEnv>,
  event: { action: ModelEventAction; fromVersion: string | null; toVersion: string | null; detail?: string },
  change: () => Promise<Response>,
): Promise<Response> {
  let eventId: number;
  try {
    eventId = await recordModelEvent(c.env, { ...event, actor: c.get("principal").user, at: new Date().toISOString() });
  } catch (error) {
    console.error(JSON.stringify({ event: "model-event-write-failed", action: event.action, error: String(error) }));
    return problemResponse(c, 503, "event-log-unavailable", [{ field: "model_events", rule: "the change could not be recorded in the review store, so it was not made; retry" }], {
      retryable: true,
    });
  }
  try {
    return await change();
  } catch (error) {
    await markModelEventFailed(c.env, eventId, String(error)).catch((e: unknown) =>
      console.error(JSON.stringify({ event: "model-event-update-failed", id: eventId, error: String(e) })),
    );
    throw error;
  }
}

/** Fetches and verifies a stored version; a 404/422 answer when it cannot become live, else null. */
async function verifyStored(c: Context<AppEnv>, version: string, field: string): Promise<Response | null> {
  try {
    await loadModel(c.env, version);
    return null;
  } catch (error) {
    if (!(error instanceof ModelLoadError)) throw error;
    if (error.code === "artifact-missing") return notStored(c, version, field);
    if (error.code === "artifact-invalid") {
      return problemResponse(c, 422, "artifact-refused", [
        { field, rule: `the stored artifact of ${version} does not verify and cannot be used` },
        ...error.problems.map((p) => ({ field: `model:${version}.${p.field}`, rule: p.rule })),
      ]);
    }
    throw error;
  }
}

function notStored(c: Context<AppEnv>, version: string, field: string): Response {
  return problemResponse(c, 404, "unknown-version", [{ field, rule: `no model version ${JSON.stringify(version)} is stored` }]);
}

function checkVersionParam(c: Context<AppEnv>, version: string, field: string): Response | null {
  const parsed = parseValue(c, field, version, versionParamSchema);
  return parsed instanceof Response ? parsed : null;
}

function checksumOf(text: string): string | null {
  try {
    const value = JSON.parse(text) as { checksum?: unknown };
    return typeof value.checksum === "string" ? value.checksum : null;
  } catch {
    return null;
  }
}

/** Summary of a stored artifact for the list (read as stored, not re-verified). */
function summarize(version: string, text: string, pointer: ModelPointer | null): ModelSummary {
  let artifact: Partial<ModelArtifact>;
  try {
    artifact = JSON.parse(text) as Partial<ModelArtifact>;
  } catch {
    artifact = {};
  }
  return {
    version,
    createdAt: artifact.createdAt ?? "",
    estimator: artifact.estimator ?? "",
    covarianceShape: artifact.covarianceShape ?? "",
    columns: artifact.columns ?? [],
    features: (artifact.features ?? []).map((f) => ({ name: f.name, transform: f.transform })),
    segmentBy: artifact.segmentBy ?? null,
    segments: Object.keys(artifact.segments ?? {}),
    cutoff: {
      mahalanobisSq: artifact.cutoff?.mahalanobisSq ?? null,
      tailProbability: artifact.cutoff?.tailProbability ?? null,
      basis: artifact.cutoff?.basis ?? "",
      flagRate: artifact.cutoff?.flagRate ?? null,
    },
    checksum: artifact.checksum ?? "",
    active: pointer?.version === version,
    shadow: pointer?.shadow === version,
  };
}
