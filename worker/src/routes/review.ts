/**
 * The review API for analysts (and admins), mounted at `/v1/review`:
 *
 * - GET  /me                      who is signed in, claim length, undo window
 * - GET  /items                   a page of the queue (filters, order, keyset cursor) and counts per state
 * - GET  /counts                  counts per state under filters
 * - GET  /facets                  segments and model versions for the filter menus
 * - GET  /items/:id               the payment, its evidence, the account's recent flags, the newest audit events
 * - GET  /items/:id/events        older audit events, a page at a time (newest first, with the count)
 * - POST /items/:id/claim         take the item for 15 minutes (409 names the holder)
 * - POST /items/:id/release       release your claim
 * - POST /items/:id/decision      { outcome: "fraud" | "legitimate", note? } under your live claim
 *                                  (429 past 10 decisions or undos of yours on the item within an hour)
 * - POST /items/:id/undo          revert your last decision within 5 minutes
 * - GET  /items/:id/account-flags the undecided flags of the item's account, oldest first
 * - POST /items/:id/account-decision  { ids, outcome, note? } decide those of them you saw, each as one
 *                                  item (claimed by another or already decided: reported, left as it is)
 * - GET  /summary                 today's figures against ANALYST_DAILY_CAPACITY
 * - GET  /export?format=csv|ndjson  the labelled set
 *
 * Every refusal is `{ error, problems: [{ field, rule }] }`; a 409 on a held item adds `claim`.
 */
import { Hono, type Context } from "hono";
import type { AppEnv } from "../app-env";
import { allow, authenticate } from "../middleware/auth";
import { BODY_LIMITS, jsonBody } from "../middleware/json-body";
import { problemResponse } from "../problems";
import { parseBody, parseQuery, parseValue } from "./validate";
import { decideAccountItems, readAccountFlags } from "../review/account-decision";
import { claimItem, decideItem, releaseItem, undoDecision, type Actor, type ActionResult as StoreResult } from "../review/actions";
import {
  accountDecisionBodySchema,
  countsQuerySchema,
  decisionBodySchema,
  eventsQuerySchema,
  exportQuerySchema,
  itemIdParamSchema,
  listQuerySchema,
  timeRange,
  type AccountDecision,
  type AccountFlags,
  type ActionResult,
  type DaySummary,
  type ErrorBody,
  type EventPage,
  type Facets,
  type ItemDetail,
  type QueuePage,
  type SortDirection,
  type SortKey,
  type StateCounts,
  type WhoAmI,
} from "../contract";
import { decodeCursor } from "../review/cursor";
import { evidenceFor } from "../review/evidence";
import { ExportColumnClash, exportFeatureColumns, exportStream, recordExportFinish, recordExportStart } from "../review/export";
import { readEvents, readItem } from "../review/item-store";
import { countStates, daySummary, listFacets, listPage, toQueueRow, type StatusRow } from "../review/queue-store";
import { CLAIM_TTL_MS, UNDO_WINDOW_MS } from "../review/settings";
import { readSettings } from "../settings";

type ReviewContext = Context<AppEnv>;

/** First direction of each order when none is given: most urgent, rarest, largest, oldest first. */
const NATURAL_DIRECTION: Record<SortKey, SortDirection> = { priority: "desc", tail: "asc", amount: "desc", age: "asc" };

/** Hono sub-app of the review API; mount with `app.route("/v1/review", reviewRoutes)`. */
export const reviewRoutes = new Hono<AppEnv>();

reviewRoutes.use("*", authenticate(), allow("analyst"));

reviewRoutes.get("/me", (c) => {
  const { user, role } = c.get("principal");
  const body: WhoAmI = { user, role: role === "admin" ? "admin" : "analyst", claimTtlSeconds: CLAIM_TTL_MS / 1000, undoWindowSeconds: UNDO_WINDOW_MS / 1000 };
  return c.json(body);
});

reviewRoutes.get("/items", async (c) => {
  const query = parseQuery(c, listQuerySchema);
  if (query instanceof Response) return query;
  const direction = query.direction ?? NATURAL_DIRECTION[query.sort];
  let after = null;
  if (query.cursor !== undefined) {
    const decoded = decodeCursor(query.cursor);
    if ("error" in decoded) return problemResponse(c, 400, "invalid-query", [{ field: "cursor", rule: decoded.error }]);
    const p = decoded.position;
    if (p.sort !== query.sort || p.direction !== direction || p.state !== query.state) {
      return problemResponse(c, 400, "invalid-query", [
        {
          field: "cursor",
          rule: `was made for state=${p.state}, sort=${p.sort}, direction=${p.direction}, not state=${query.state}, sort=${query.sort}, direction=${direction}; start again without a cursor`,
        },
      ]);
    }
    after = p;
  }
  const range = checkedRange(c, query.from, query.to);
  if (range instanceof Response) return range;
  const filters = { segment: query.segment, modelVersion: query.modelVersion, selection: query.selection, ...range };
  const now = Date.now();
  const [page, counts] = await Promise.all([
    listPage(c.env, { ...filters, state: query.state, sort: query.sort, direction, limit: query.limit, after }, now),
    countStates(c.env, filters, now),
  ]);
  const body: QueuePage = { items: page.rows, nextCursor: page.nextCursor, counts, sort: query.sort, direction, asOf: new Date(now).toISOString() };
  return c.json(body);
});

reviewRoutes.get("/counts", async (c) => {
  const query = parseQuery(c, countsQuerySchema);
  if (query instanceof Response) return query;
  const range = checkedRange(c, query.from, query.to);
  if (range instanceof Response) return range;
  const counts: StateCounts = await countStates(c.env, { segment: query.segment, modelVersion: query.modelVersion, selection: query.selection, ...range }, Date.now());
  return c.json(counts);
});

reviewRoutes.get("/facets", async (c) => c.json((await listFacets(c.env)) satisfies Facets));

reviewRoutes.get("/summary", async (c) => {
  const { ANALYST_DAILY_CAPACITY: capacity } = readSettings(c.env, ["ANALYST_DAILY_CAPACITY"]);
  return c.json((await daySummary(c.env, c.get("principal").user, Date.now(), capacity)) satisfies DaySummary);
});

reviewRoutes.get("/items/:id", async (c) => {
  const id = itemId(c);
  if (id instanceof Response) return id;
  const now = Date.now();
  const stored = await readItem(c.env, id, now);
  if (!stored) return problemResponse(c, 404, "not-found", [{ field: "id", rule: `no review item has id ${id}` }]);
  const evidence = await evidenceFor(c.env, stored.status.model_version, stored.status.segment, stored.features);
  const features: Record<string, number> = {};
  for (const [name, value] of Object.entries(stored.features)) if (typeof value === "number") features[name] = value;
  const body: ItemDetail = {
    item: {
      ...toQueueRow(stored.status, now),
      features,
      logDensity: stored.logDensity,
      cutoffMahalanobisSq: stored.cutoffMahalanobisSq,
      inclusionProbability: stored.inclusionProbability,
      receivedAt: stored.receivedAt,
    },
    reasons: stored.reasons,
    residuals: evidence.residuals,
    pair: evidence.pair,
    evidenceGap: evidence.gap,
    history: stored.history,
    events: stored.trail.events,
    eventCount: stored.trail.count,
    eventsNextBefore: stored.trail.nextBefore,
    conflicts: stored.conflicts,
    undoableUntil: undoableUntil(stored.status, c.get("principal").user, now),
  };
  return c.json(body);
});

reviewRoutes.get("/items/:id/events", async (c) => {
  const id = itemId(c);
  if (id instanceof Response) return id;
  const query = parseQuery(c, eventsQuerySchema);
  if (query instanceof Response) return query;
  const page = await readEvents(c.env, id, query.before ?? null, query.limit);
  if (!page) return problemResponse(c, 404, "not-found", [{ field: "id", rule: `no review item has id ${id}` }]);
  return c.json(page satisfies EventPage);
});

reviewRoutes.post("/items/:id/claim", (c) => act(c, (env, id, actor) => claimItem(env, id, actor)));
reviewRoutes.post("/items/:id/release", (c) => act(c, (env, id, actor) => releaseItem(env, id, actor)));
reviewRoutes.post("/items/:id/undo", (c) => act(c, (env, id, actor) => undoDecision(env, id, actor)));

reviewRoutes.post("/items/:id/decision", jsonBody(BODY_LIMITS.score), async (c) => {
  const body = parseBody(c, decisionBodySchema, "invalid-body");
  if (body instanceof Response) return body;
  const note = body.note === undefined || body.note.trim() === "" ? null : body.note;
  return act(c, (env, id, actor) => decideItem(env, id, actor, body.outcome, note));
});

reviewRoutes.get("/items/:id/account-flags", async (c) => {
  const id = itemId(c);
  if (id instanceof Response) return id;
  const flags = await readAccountFlags(c.env, id, Date.now());
  if (!flags) return problemResponse(c, 404, "not-found", [{ field: "id", rule: `no review item has id ${id}` }]);
  return c.json(flags satisfies AccountFlags);
});

reviewRoutes.post("/items/:id/account-decision", jsonBody(BODY_LIMITS.score), async (c) => {
  const id = itemId(c);
  if (id instanceof Response) return id;
  const body = parseBody(c, accountDecisionBodySchema, "invalid-body");
  if (body instanceof Response) return body;
  const { ids, outcome } = body;
  const note = body.note === undefined || body.note.trim() === "" ? null : body.note;
  const { user, role } = c.get("principal");
  let result: Awaited<ReturnType<typeof decideAccountItems>>;
  try {
    result = await decideAccountItems(c.env, id, ids, { user, role, nowMs: Date.now() }, outcome, note);
  } catch (error) {
    // Each item's claim and decision are their own D1 batches: what was decided before the
    // failure stays decided with its audit rows; the analyst reloads the account's flags and goes on.
    console.error(JSON.stringify({ event: "review-store-unavailable", path: new URL(c.req.url).pathname, error: String(error) }));
    const rule = "the review store could not be written part way; reload the account's flags to see which were decided, then try the rest again";
    return problemResponse(c, 503, "review-store-unavailable", [{ field: "ids", rule }], { retryable: true, headers: { "retry-after": "2" } });
  }
  if (!result.ok) return problemResponse(c, result.status, result.error, [{ field: "id", rule: result.rule }]);
  const answer: AccountDecision = result.answer;
  // Every item refused: nothing changed, a conflict; otherwise the per-item report is the answer.
  if (answer.decided.length === 0)
    return c.json({ error: "none-decided", problems: answer.refused.map((r) => ({ field: `ids[${ids.indexOf(r.id)}]`, rule: r.rule })), ...answer }, 409);
  return c.json(answer);
});

reviewRoutes.get("/export", async (c) => {
  const query = parseQuery(c, exportQuerySchema);
  if (query instanceof Response) return query;
  let columns: string[];
  try {
    columns = await exportFeatureColumns(c.env, query.modelVersion);
  } catch (error) {
    if (!(error instanceof ExportColumnClash)) throw error;
    return problemResponse(c, 409, "export-column-clash", [
      { field: "modelVersion", rule: `feature ${error.feature} has the name of a fixed export column; export one model version at a time with ?modelVersion=` },
    ]);
  }
  const nowMs = Date.now();
  const day = new Date(nowMs).toISOString().slice(0, 10);
  const csv = query.format === "csv";
  const exportId = await recordExportStart(c.env, c.get("principal").user, query.format, query.modelVersion, nowMs);
  const env = c.env;
  const finished = exportId === null ? undefined : (rows: number) => recordExportFinish(env, exportId, rows);
  return new Response(exportStream(c.env, query.format, columns, query.modelVersion, finished), {
    headers: {
      ...(exportId === null ? {} : { "x-isodense-export-id": String(exportId) }),
      "content-type": csv ? "text/csv; charset=utf-8" : "application/x-ndjson; charset=utf-8",
      "content-disposition": `attachment; filename="isodense-labels-${day}.${csv ? "csv" : "ndjson"}"`,
      "cache-control": "no-store",
    },
  });
});

/** Runs one change for the signed-in analyst and answers with the new queue line or the refusal. */
async function act(c: ReviewContext, run: (env: AppEnv["Bindings"], id: number, actor: Actor) => Promise<StoreResult>): Promise<Response> {
  const id = itemId(c);
  if (id instanceof Response) return id;
  const { user, role } = c.get("principal");
  const actor: Actor = { user, role, nowMs: Date.now() };
  let result: StoreResult;
  try {
    result = await run(c.env, id, actor);
  } catch (error) {
    // The state change and its audit row are one D1 batch (one transaction): when D1 fails,
    // neither was written, so the analyst may simply try again.
    console.error(JSON.stringify({ event: "review-store-unavailable", path: new URL(c.req.url).pathname, error: String(error) }));
    return problemResponse(
      c,
      503,
      "review-store-unavailable",
      [{ field: "id", rule: `item ${id} was not changed: the review store could not be written; nothing was recorded, try again` }],
      {
        retryable: true,
        headers: { "retry-after": "2" },
      },
    );
  }
  if (!result.ok) {
    const body: ErrorBody = { error: result.error, problems: result.problems };
    if (result.claim) body.claim = result.claim;
    if (result.retryAfterSeconds !== undefined) c.header("retry-after", String(result.retryAfterSeconds));
    return c.json(body, result.status);
  }
  const answer: ActionResult = { item: toQueueRow(result.row, actor.nowMs), undoableUntil: undoableUntil(result.row, user, actor.nowMs) };
  return c.json(answer);
}

function undoableUntil(row: StatusRow, user: string, nowMs: number): string | null {
  return row.undo_by === user && row.undo_until_ms !== null && row.undo_until_ms > nowMs ? new Date(row.undo_until_ms).toISOString() : null;
}

/** The `:id` path parameter as a positive safe integer, or the 400 answer. */
function itemId(c: ReviewContext): number | Response {
  return parseValue(c, "id", c.req.param("id") ?? "", itemIdParamSchema, "invalid-path");
}

/** `from` and `to` as a half-open ms range, refusing a range that ends before it starts. */
function checkedRange(c: ReviewContext, from: string | undefined, to: string | undefined): { fromMs?: number; toMs?: number } | Response {
  const range = timeRange(from, to);
  if (range.fromMs !== undefined && range.toMs !== undefined && range.toMs <= range.fromMs) {
    return problemResponse(c, 400, "invalid-query", [{ field: "to", rule: `must not be before from (${from}). Actual: ${to}` }]);
  }
  return range;
}
