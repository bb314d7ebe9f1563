/**
 * The insights API behind the model page, mounted at `/v1/insights` (analysts read, admins act):
 *
 * - GET  /model              live and shadow versions (fit report, diagnostics, refit mark), the
 *                            shadow's renew report, the latest weekly report, the drift table and
 *                            daily flag rates (?days=7)
 * - GET  /operating          the labelled operating table of a version (?version, ?days, ?cutoff)
 * - GET  /shadow             the live/shadow comparison so far and the latest disagreements (?shadowVersion)
 * - GET  /histogram          d² bucket counts against the reference edges (?version, ?days)
 * - POST /publish-cutoff     admin: a new version with a retuned cutoff, stored and activated,
 *                            audited in model_events (rollback: POST /v1/models/rollback)
 *
 * Every refusal is `{ error, problems: [{ field, rule }] }`.
 */
import { Hono, type Context } from "hono";
import { canonicalJson } from "../../../shared-model/src";
import type { AppEnv } from "../app-env";
import {
  modelQuerySchema,
  operatingQuerySchema,
  publishCutoffSchema,
  shadowQuerySchema,
  windowQuerySchema,
  type HistogramData,
  type ModelEventRow,
  type ModelPageData,
  type ModelPointer,
  type OperatingData,
  type PublishedCutoff,
  type ShadowData,
  type StoredReport,
} from "../contract";
import { publishCutoff } from "../insights/publish-cutoff";
import { figuresAtCutoff } from "../insights/operating";
import { dayFlagRates, driftEntries } from "../insights/drift-report";
import { shadowComparison, shadowDisagreements, shadowSetAt } from "../insights/shadow-comparison";
import { bucketTotals, dailyVolumes, dayBefore, labelledRows } from "../insights/traffic-queries";
import { versionSummary } from "../insights/version-summary";
import { allow, authenticate } from "../middleware/auth";
import { BODY_LIMITS, jsonBody } from "../middleware/json-body";
import { problemResponse } from "../problems";
import { parseBody, parseQuery } from "./validate";
import { modelCache, ModelLoadError, type LoadedModel } from "../scoring/model-cache";
import { readArtifactText, readPointer } from "../storage/model-store";
import { renewReportsForPage } from "../storage/renew-store";

type InsightsContext = Context<AppEnv>;

/** Days of traffic the page looks at unless `?days=` says otherwise. */
const DEFAULT_DAYS = 7;

/** Hono sub-app of the insights API; mount with `app.route("/v1/insights", insightRoutes)`. */
export const insightRoutes = new Hono<AppEnv>();

insightRoutes.use("*", authenticate(), allow("analyst"));

insightRoutes.get("/model", async (c) => {
  const query = parseQuery(c, modelQuerySchema);
  if (query instanceof Response) return query;
  const { fromDay, toDay } = dayWindow(query.days);
  const pointer = await readPointer(c.env);
  if (pointer === null) return noActiveModel(c);
  const live = await modelOrProblem(c, pointer.version, "pointer.version");
  if (live instanceof Response) return live;
  const shadow = pointer.shadow === null ? null : await modelOrProblem(c, pointer.shadow, "pointer.shadow");
  if (shadow instanceof Response) return shadow;
  const [activeSummary, shadowSummary, totals, volumes, report, events, renew, shadowSince] = await Promise.all([
    versionSummary(c.env, live.artifact),
    shadow ? versionSummary(c.env, shadow.artifact) : Promise.resolve(null),
    bucketTotals(c.env, live, fromDay, toDay),
    dailyVolumes(c.env, live.version, fromDay, toDay),
    latestReport(c.env),
    recentEvents(c.env),
    renewReportsForPage(c.env, pointer.shadow),
    pointer.shadow === null ? Promise.resolve(null) : shadowSetAt(c.env, pointer.shadow),
  ]);
  return c.json({
    pointer,
    active: activeSummary,
    shadow: shadowSummary,
    renew,
    shadowSince,
    report,
    drift: { fromDay, toDay, payments: totals.payments, rows: driftEntries(live, totals) },
    dailyFlags: dayFlagRates(volumes, live.artifact.cutoff.flagRate),
    events,
  } satisfies ModelPageData);
});

insightRoutes.get("/operating", async (c) => {
  const query = parseQuery(c, operatingQuerySchema);
  if (query instanceof Response) return query;
  const span = await modelWindow(c, query);
  if (span instanceof Response) return span;
  const { model, days } = span;
  const sources = await sameParameterVersions(c.env, model, span.pointer);
  const [rows, volumes] = await Promise.all([labelledRows(c.env, sources), dailyVolumes(c.env, model.version, span.fromDay, span.toDay)]);
  const scored = volumes.reduce((a, v) => a + v.scored, 0);
  const flagged = volumes.reduce((a, v) => a + v.flagged, 0);
  const scoredPerDay = volumes.length > 0 ? scored / volumes.length : null;
  const atCutoff = query.cutoff === undefined ? null : figuresAtCutoff(rows, query.cutoff, scoredPerDay);
  return c.json({
    version: model.version,
    labelVersions: sources,
    columns: model.artifact.columns.length,
    cutoff: model.artifact.cutoff,
    labels: { ...rows, labelled: rows.fraud.length, fraudCount: rows.fraud.reduce((a, b) => a + b, 0) },
    traffic: { days, daysWithTraffic: volumes.length, scored, flagged, scoredPerDay },
    atCutoff: typeof atCutoff === "string" ? null : atCutoff,
    unavailable: typeof atCutoff === "string" ? atCutoff : null,
  } satisfies OperatingData);
});

insightRoutes.get("/shadow", async (c) => {
  const query = parseQuery(c, shadowQuerySchema);
  if (query instanceof Response) return query;
  const pointer = await readPointer(c.env);
  if (pointer === null) return noActiveModel(c);
  const shadowVersion = query.shadowVersion ?? pointer.shadow;
  if (shadowVersion === null) return c.json({ pointer, comparison: null, disagreements: [] } satisfies ShadowData);
  const [comparison, disagreements] = await Promise.all([shadowComparison(c.env, pointer.version, shadowVersion), shadowDisagreements(c.env, pointer.version, shadowVersion)]);
  return c.json({ pointer, comparison, disagreements } satisfies ShadowData);
});

insightRoutes.get("/histogram", async (c) => {
  const query = parseQuery(c, windowQuerySchema);
  if (query instanceof Response) return query;
  const span = await modelWindow(c, query);
  if (span instanceof Response) return span;
  const { model, days } = span;
  const totals = await bucketTotals(c.env, model, span.fromDay, span.toDay);
  const edges = model.artifact.reference.scoreEdges;
  return c.json({
    version: model.version,
    days,
    edges,
    counts: totals.score,
    payments: totals.payments,
    // Decile edges: each bucket held 1/(edges + 1) of the training traffic.
    expectedShare: 1 / (edges.length + 1),
    cutoffMahalanobisSq: model.artifact.cutoff.mahalanobisSq,
  } satisfies HistogramData);
});

insightRoutes.post("/publish-cutoff", allow("admin"), jsonBody(BODY_LIMITS.small), async (c) => {
  const body = parseBody(c, publishCutoffSchema);
  if (body instanceof Response) return body;
  const outcome = await publishCutoff(c.env, c.get("principal").user, body);
  if (outcome.ok) return c.json(outcome.value satisfies PublishedCutoff, 201);
  return problemResponse(c, outcome.status, outcome.error, outcome.problems, outcome.retryable ? { retryable: true } : {});
});

function noActiveModel(c: InsightsContext): Response {
  return problemResponse(c, 409, "no-active-model", [{ field: "pointer", rule: "no model has been activated yet; publish and activate one first" }]);
}

/** Loads a version, answering 404/422 (naming `field`) when it is not stored or does not verify. */
async function modelOrProblem(c: InsightsContext, version: string, field: string): Promise<LoadedModel | Response> {
  try {
    return await modelCache.model(c.env, version);
  } catch (error) {
    if (!(error instanceof ModelLoadError)) throw error;
    if (error.code === "artifact-missing") return problemResponse(c, 404, "unknown-version", [{ field, rule: `no model version ${JSON.stringify(version)} is stored` }]);
    if (error.code === "artifact-invalid") return problemResponse(c, 422, "artifact-refused", [{ field, rule: `the stored artifact of ${version} does not verify` }]);
    throw error;
  }
}

/** The UTC days an insight reads: the last `days` (default 7), today included. */
interface DayWindow {
  days: number;
  fromDay: string;
  toDay: string;
}

/** The model an insight reads (the requested version, or the live one) and its window of days. */
async function modelWindow(c: InsightsContext, query: { version?: string; days?: number }): Promise<({ model: LoadedModel; pointer: ModelPointer | null } & DayWindow) | Response> {
  const resolved = await versionOrLive(c, query.version);
  if (resolved instanceof Response) return resolved;
  return { ...resolved, ...dayWindow(query.days) };
}

/** The window of `days` UTC days ending today. */
function dayWindow(days = DEFAULT_DAYS): DayWindow {
  const now = new Date();
  return { days, fromDay: dayBefore(now, days - 1), toDay: dayBefore(now, 0) };
}

/** The requested version, or the live one. */
async function versionOrLive(c: InsightsContext, version: string | undefined): Promise<{ model: LoadedModel; pointer: ModelPointer | null } | Response> {
  const pointer = await readPointer(c.env);
  if (version === undefined && pointer === null) return noActiveModel(c);
  const model = await modelOrProblem(c, version ?? pointer!.version, "version");
  return model instanceof Response ? model : { model, pointer };
}

/**
 * The version itself and the earlier live versions with the very same fitted features and segments
 * (a cutoff retuned from it, or the model it was retuned from): a payment has the same d² under all
 * of them, so their decisions are labels for this version too, with the weights they were drawn with.
 */
async function sameParameterVersions(env: AppEnv["Bindings"], model: LoadedModel, pointer: ModelPointer | null): Promise<string[]> {
  // Canonical JSON: the parsed artifact and the stored text may order keys differently.
  const fingerprint = canonicalJson([model.artifact.features, model.artifact.segments]);
  const candidates = pointer ? [pointer.version, ...pointer.previous].filter((v) => v !== model.version) : [];
  const same = await Promise.all(
    candidates.map(async (version) => {
      const text = await readArtifactText(env, version);
      if (text === null) return null;
      try {
        const other = JSON.parse(text) as { features?: unknown; segments?: unknown };
        return canonicalJson([other.features, other.segments]) === fingerprint ? version : null;
      } catch {
        return null;
      }
    }),
  );
  return [model.version, ...same.filter((v): v is string => v !== null)];
}

async function latestReport(env: AppEnv["Bindings"]): Promise<StoredReport | null> {
  const row = await env.DB.prepare("SELECT id, created_at, run_by, status, report_json FROM model_reports ORDER BY id DESC LIMIT 1").first<{
    id: number;
    created_at: string;
    run_by: string;
    status: "ok" | "error";
    report_json: string;
  }>();
  return row ? { id: row.id, createdAt: row.created_at, runBy: row.run_by, status: row.status, body: JSON.parse(row.report_json) as StoredReport["body"] } : null;
}

async function recentEvents(env: AppEnv["Bindings"]): Promise<ModelEventRow[]> {
  const { results } = await env.DB.prepare(
    "SELECT id, at, actor, action, from_version AS fromVersion, to_version AS toVersion, outcome, detail FROM model_events ORDER BY id DESC LIMIT 10",
  ).all<ModelEventRow>();
  return results;
}
