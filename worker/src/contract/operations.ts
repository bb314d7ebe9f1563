/**
 * Every route of the HTTP API in one table: what it takes (path parameters, query, body) and what
 * it answers, status by status, as the zod schemas of this contract. `/openapi.json` is generated
 * from this table (./openapi.ts), and `worker/test/workerd/contract.test.ts` checks real answers against it,
 * so the document, the validation and the types cannot drift apart.
 *
 * Adding a route: declare its shapes in the area's module (`review.ts`, `insights.ts`, …), add an
 * entry here, validate with those schemas in the route (`parseBody`, `parseQuery`), and type the
 * answer with the declared type.
 */
import { z } from "zod";
import { modelArtifactSchema } from "../../../shared-model/src/artifact";
import { accountRefParamSchema, chainReportSchema, erasureAnswerSchema, retentionRunSchema, retentionRunsSchema } from "./privacy";
import {
  histogramSchema,
  modelPageSchema,
  modelQuerySchema,
  operatingQuerySchema,
  operatingSchema,
  publishCutoffSchema,
  publishedCutoffSchema,
  shadowDataSchema,
  shadowQuerySchema,
  windowQuerySchema,
} from "./insights";
import { renewReportSchema } from "../../../shared-model/src/renew-report";
import { healthSchema, modelListSchema, pointerChangeSchema, renewFilingSchema, shadowRequestSchema, storedModelSchema, uploadAnswerSchema } from "./models";
import {
  accountDecisionBodySchema,
  accountDecisionRefusalSchema,
  accountDecisionSchema,
  accountFlagsSchema,
  actionResultSchema,
  countsQuerySchema,
  daySummarySchema,
  decisionBodySchema,
  eventPageSchema,
  eventsQuerySchema,
  exportQuerySchema,
  facetsSchema,
  itemDetailSchema,
  listQuerySchema,
  queuePageSchema,
  stateCountsSchema,
  whoAmISchema,
} from "./review";
import { batchAnswerSchema, batchRequestSchema, echoSchema, scoreAnswerSchema, scoreRequestSchema } from "./scoring";
import { errorSchema, jsonValueSchema, versionParamSchema } from "./wire";

/** A review item id in a path: a positive whole number. */
export const itemIdParamSchema = z
  .string()
  .regex(/^[1-9]\d{0,15}$/, { error: "must be a positive whole number (an item id from GET /v1/review/items)" })
  .transform(Number)
  .refine(Number.isSafeInteger, { error: "must be a positive whole number (an item id from GET /v1/review/items)" });

/** The OpenAPI document's outline (its paths and components are JSON Schema and OpenAPI objects). */
const openApiDocumentSchema = z.strictObject({
  openapi: z.literal("3.1.0"),
  info: z.strictObject({ title: z.string(), version: z.string(), description: z.string() }),
  servers: z.array(z.strictObject({ url: z.string() })),
  components: z.strictObject({ securitySchemes: z.record(z.string(), jsonValueSchema), schemas: z.record(z.string(), jsonValueSchema) }),
  paths: z.record(z.string(), z.record(z.string(), jsonValueSchema)).describe("Path → method → OpenAPI operation object."),
});

/** A JSON answer: its schema, registered in the document under `name`. */
export interface JsonAnswer {
  description: string;
  name: string;
  schema: z.ZodType;
}

/** An answer that is not JSON (the export), described by its media types. */
export interface TextAnswer {
  description: string;
  mediaTypes: readonly string[];
}

/** An error answer (`errorSchema`). */
export interface ErrorAnswer {
  description: string;
  error: true;
}

/** What a route answers with one status. */
export type Answer = JsonAnswer | TextAnswer | ErrorAnswer;

/** One route: method and path (OpenAPI form, `{id}`), what it takes and what it answers. */
export interface Operation {
  method: "get" | "post" | "put" | "delete";
  path: string;
  summary: string;
  description?: string;
  /** Public routes take no credential; all others the bearer scheme. */
  public?: true;
  params?: Record<string, z.ZodType>;
  query?: z.ZodObject;
  body?: { name: string; schema: z.ZodType };
  answers: Record<number, Answer>;
}

const json = (name: string, schema: z.ZodType, description: string): JsonAnswer => ({ name, schema, description });
const error = (description: string): ErrorAnswer => ({ description, error: true });

/** Error answers every authenticated route can give. */
const AUTH_ERRORS = {
  401: error("Missing or unknown bearer token."),
  403: error("The token's role may not call this route."),
  500: error("Configuration error (names the variable or secret) or an unexpected failure."),
};
/** Error answers of every route that reads a JSON body. */
const BODY_ERRORS = {
  400: error("Invalid JSON or a field that breaks its rule; `problems` names each field and rule."),
  413: error("Body larger than the route's limit."),
  415: error("Content type is not application/json."),
};
const QUERY_ERROR = { 400: error("A query parameter breaks its rule.") };
const NO_ITEM = { 404: error("No such item.") };

const item = { id: itemIdParamSchema };
const version = { version: versionParamSchema };

/** A review action on one item (claim, release, undo): the item after the change, or why not. */
function itemAction(path: string, summary: string, description: string): Operation {
  return {
    method: "post",
    path,
    summary,
    description,
    params: item,
    answers: {
      200: json("ActionResult", actionResultSchema, "The item after the change."),
      400: error("A malformed id."),
      ...AUTH_ERRORS,
      ...NO_ITEM,
      409: error("Someone else holds the item, or its state does not allow the change; a held item's answer adds `claim`."),
      429: error("Ten decisions or undos of yours on this item within the hour; Retry-After says when."),
      503: error("The review store could not be written; nothing changed (`retryable: true`)."),
    },
  };
}

/** An erasure route (DELETE on an account): what it erases, and its 503s. */
function erasure(path: string, summary: string, description: string, unavailable: string): Operation {
  return {
    method: "delete",
    path,
    summary,
    description,
    params: { accountRef: accountRefParamSchema },
    answers: { 200: json("ErasureAnswer", erasureAnswerSchema, "Erased; counts per store."), 400: error("accountRef breaks its rule."), ...AUTH_ERRORS, 503: error(unavailable) },
  };
}

/** A read-only route, with its query if it takes one. */
function read(path: string, summary: string, description: string, answer: JsonAnswer, query?: z.ZodObject, more: Record<number, Answer> = {}): Operation {
  const answers: Record<number, Answer> = { 200: answer, ...AUTH_ERRORS, ...more };
  if (query) answers[400] = QUERY_ERROR[400];
  return { method: "get", path, summary, description, ...(query ? { query } : {}), answers };
}

const NO_LIVE_MODEL = { 409: error("No model has been activated yet.") };
const EVENT_LOG_DOWN = error("The change could not be recorded in model_events, so it was not made (`retryable: true`).");
const VERSION_ERRORS = { 404: error("The version is not stored."), 422: error("The stored artifact does not verify.") };

/** Every route of the API. */
export const OPERATIONS: readonly Operation[] = [
  {
    method: "post",
    path: "/v1/score",
    summary: "Score one payment",
    description:
      "Role flow. Body limit 16 KiB. Send ready `features`, or a `payment` record whose features the model's record spec derives at the edge from the account's earlier payments (the payment is then recorded in the account's history; a repeated transactionId is not counted twice; the answer adds `derived`). The payment's time must lie within PAYMENT_CLOCK_TOLERANCE_SECONDS of the server clock (0: no check). The answer is the same for the same (model version, body); a repeat with other content under the same transactionId answers 409.",
    body: { name: "ScoreRequest", schema: scoreRequestSchema },
    answers: {
      200: json("ScoreAnswer", scoreAnswerSchema, "Score, decision and reasons."),
      ...BODY_ERRORS,
      ...AUTH_ERRORS,
      409: error("transactionId already scored under this model with other content."),
      503: error(
        "No model loaded (`no-model`), the review hand-off failed (`handoff-failed`), or the account's history did not answer within HISTORY_TIMEOUT_MS (`history-unavailable`); `retryable: true`, see Retry-After.",
      ),
    },
  },
  {
    method: "post",
    path: "/v1/score/batch",
    summary: "Score up to MAX_BATCH payments",
    description:
      "Role flow. Body limit 1 MiB. Each payment (ready features or a payment record, as for /v1/score) is scored or refused on its own; the envelope alone decides a 400. Payment records of one account are derived in the order sent.",
    body: { name: "BatchRequest", schema: batchRequestSchema },
    answers: { 200: json("BatchAnswer", batchAnswerSchema, "One result per payment, in order."), ...BODY_ERRORS, ...AUTH_ERRORS, 503: error("No model loaded.") },
  },
  {
    method: "post",
    path: "/v1/echo",
    summary: "Echo the JSON body (benchmark baseline)",
    description: "Role flow. Same checks as /v1/score, no scoring.",
    body: { name: "EchoBody", schema: echoSchema },
    answers: { 200: json("EchoBody", echoSchema, "The body as parsed."), ...BODY_ERRORS, ...AUTH_ERRORS },
  },
  {
    method: "get",
    path: "/v1/health",
    summary: "Service health",
    public: true,
    answers: { 200: json("Health", healthSchema, "A model is loaded."), 503: json("Health", healthSchema, "No model loaded.") },
  },
  {
    method: "get",
    path: "/v1/models",
    summary: "List stored model versions",
    description: "Role admin. 50 per page; `cursor` continues.",
    query: z.strictObject({ cursor: z.string().optional() }),
    answers: { 200: json("ModelList", modelListSchema, "Versions with their summary and the pointer."), 400: error("A cursor this list did not issue."), ...AUTH_ERRORS },
  },
  {
    method: "post",
    path: "/v1/models",
    summary: "Upload a model artifact",
    description: "Role admin. Body limit 5 MiB. Verified by the model core (schema, checksum, precision·covariance ≈ I). Versions are immutable.",
    body: { name: "ModelArtifact", schema: modelArtifactSchema },
    answers: {
      201: json("UploadAnswer", uploadAnswerSchema, "Stored."),
      200: json("UploadAnswer", uploadAnswerSchema, "The identical artifact was already stored."),
      ...BODY_ERRORS,
      ...AUTH_ERRORS,
      409: error("The version is stored with other content."),
      422: error("The artifact does not verify; `problems` lists each path and rule."),
      503: EVENT_LOG_DOWN,
    },
  },
  {
    method: "get",
    path: "/v1/models/{version}",
    summary: "Read one stored artifact",
    params: version,
    answers: {
      200: json("StoredModel", storedModelSchema, "The artifact and whether it is live or shadow."),
      400: error("A malformed version."),
      ...AUTH_ERRORS,
      404: error("Not stored."),
    },
  },
  {
    method: "post",
    path: "/v1/models/{version}/activate",
    summary: "Make a stored version live",
    params: version,
    answers: {
      200: json("PointerChange", pointerChangeSchema, "The new pointer."),
      400: error("A malformed version."),
      ...AUTH_ERRORS,
      ...VERSION_ERRORS,
      503: EVENT_LOG_DOWN,
    },
  },
  {
    method: "post",
    path: "/v1/models/{version}/renew-report",
    summary: "File the report of an isodense renew run beside its stored candidate",
    description:
      "Role admin. Body limit 256 KiB: the renew report (shared-model/src/renew-report.ts, format isodense.renew/v1) of a candidate published as the shadow or held back by the gate. The same candidate and outcome are filed once.",
    params: version,
    body: { name: "RenewReport", schema: renewReportSchema },
    answers: {
      201: json("RenewFiling", renewFilingSchema, "Filed."),
      200: json("RenewFiling", renewFilingSchema, "This candidate's report with this outcome was already filed."),
      ...BODY_ERRORS,
      ...AUTH_ERRORS,
      404: error("The candidate is not stored."),
      422: error("The report names another version, or its outcome is 'unchanged'; or the stored candidate does not verify."),
    },
  },
  {
    method: "post",
    path: "/v1/models/rollback",
    summary: "Make the previous live version live again",
    answers: {
      200: json("PointerChange", pointerChangeSchema, "The new pointer."),
      ...AUTH_ERRORS,
      404: error("The previous version is no longer stored."),
      409: error("No previous version."),
      422: error("The previous artifact does not verify."),
      503: EVENT_LOG_DOWN,
    },
  },
  {
    method: "put",
    path: "/v1/models/shadow",
    summary: "Set or clear the shadow model",
    body: { name: "ShadowRequest", schema: shadowRequestSchema },
    answers: {
      200: json("PointerChange", pointerChangeSchema, "The new pointer."),
      ...BODY_ERRORS,
      ...AUTH_ERRORS,
      ...VERSION_ERRORS,
      409: error("No live model, or the shadow equals the live version."),
      503: EVENT_LOG_DOWN,
    },
  },
  erasure(
    "/v1/accounts/{accountRef}/history",
    "Erase one account's payment history",
    "Role admin. Deletes what the account-history store holds for the account (its payments and expiry alarm). Audited in erasure_events without the data: actor, time, SHA-256 of the account reference, stores and counts.",
    "The erasure could not be logged (nothing erased: `erasure-log-unavailable`) or the history store did not confirm it (`history-unavailable`, logged as failed); `retryable: true`.",
  ),
  erasure(
    "/v1/accounts/{accountRef}",
    "Erase one account's data everywhere isodense keeps it",
    "Role admin. Deletes the account's review items with their notes, its payment conflicts, the shadow scores of its payments, and its payment history; the audit events of its items become tombstones (content gone, hash-chain digests kept, so GET /v1/audit/verify still verifies). Whole items at a time: a decision racing the erasure lands before it (and is erased) or finds no item (404). Audited in erasure_events without the data (actor, time, SHA-256 of the account reference, counts per store). `outsideIsodense` names labels already exported, which isodense cannot reach.",
    "The erasure could not be logged (nothing erased: `erasure-log-unavailable`), or a store failed part-way (`review-store-unavailable`, `history-unavailable`; logged as failed with what went before); send it again. `retryable: true`.",
  ),
  read(
    "/v1/audit/verify",
    "Verify the review audit trail's hash chain",
    "Role admin. Seals pending events, then checks every event's digest and link from the first: `ok`, counts of events and tombstones (erased content, digests kept), the head (`eventId`, `chain`: keep it outside D1 to compare later) and `firstBroken` (the first event that does not verify, the kind of break and what it means). 200 either way.",
    json("ChainReport", chainReportSchema, "What the walk found."),
  ),
  read(
    "/v1/retention/runs",
    "Latest retention runs",
    "Role admin. Newest first: counts deleted per kind, items kept because no finished label export holds them, and why.",
    json("RetentionRuns", retentionRunsSchema, "The runs."),
  ),
  {
    method: "post",
    path: "/v1/retention/run",
    summary: "Run retention now",
    description:
      "Role admin. Deletes what is older than RETENTION_DAYS (decided items held by a finished label export, with notes and audit content; payment conflicts; shadow scores), in batches, each counted in the run's row in the same transaction; answers the run. The weekly cron runs it too.",
    answers: {
      200: json("RetentionRun", retentionRunSchema, "The run: status `done`, or `more` when it stopped at its batch limit (the next run carries on)."),
      ...AUTH_ERRORS,
      503: error("The run failed part-way (`retention-failed`): what it deleted is counted, the rest is untouched; `retryable: true`."),
    },
  },
  read("/v1/review/me", "Who is signed in", "Roles analyst, admin.", json("WhoAmI", whoAmISchema, "The signed-in user and the claim and undo windows.")),
  read(
    "/v1/review/items",
    "List review items",
    "Roles analyst, admin. Filters, sort and keyset paging with an opaque cursor.",
    json("QueuePage", queuePageSchema, "A page of the queue with counts per state."),
    listQuerySchema,
  ),
  read("/v1/review/counts", "Counts per state under the filters", "Roles analyst, admin.", json("StateCounts", stateCountsSchema, "Items per state."), countsQuerySchema),
  read("/v1/review/facets", "Values the filters can take", "Roles analyst, admin.", json("Facets", facetsSchema, "Segments and model versions in the queue.")),
  read("/v1/review/summary", "Today's figures against the daily capacity", "Roles analyst, admin.", json("DaySummary", daySummarySchema, "Today's figures.")),
  {
    method: "get",
    path: "/v1/review/items/{id}",
    summary: "One item with its evidence",
    description:
      "Roles analyst, admin. Reasons, the pair plot's marginal Gaussian, the account's recent flags, the newest 20 audit events (with the count and the cursor for older ones) and conflicting repeats of the transaction id.",
    params: item,
    answers: { 200: json("ItemDetail", itemDetailSchema, "The item and its evidence."), 400: error("A malformed id."), ...AUTH_ERRORS, ...NO_ITEM },
  },
  {
    method: "get",
    path: "/v1/review/items/{id}/events",
    summary: "A page of an item's audit trail",
    description: "Roles analyst, admin. Newest first, `limit` (1–100, default 20) events with an id below `before`.",
    params: item,
    query: eventsQuerySchema,
    answers: { 200: json("EventPage", eventPageSchema, "The page."), 400: error("A malformed id or query."), ...AUTH_ERRORS, ...NO_ITEM },
  },
  itemAction("/v1/review/items/{id}/claim", "Take an item", "Roles analyst, admin. A claim lasts 15 minutes; the loser of a race gets 409 naming the holder."),
  itemAction("/v1/review/items/{id}/release", "Give a claimed item back", "Roles analyst, admin. Only the holder may release."),
  itemAction(
    "/v1/review/items/{id}/undo",
    "Undo your last decision",
    "Roles analyst, admin. Within 5 minutes; audited; 429 with Retry-After past ten decisions or undos of yours on the item within the hour.",
  ),
  {
    ...itemAction(
      "/v1/review/items/{id}/decision",
      "Confirm as fraud or dismiss as legitimate",
      "Roles analyst, admin. Needs your live claim; every change is appended to the audit trail.",
    ),
    body: { name: "DecisionRequest", schema: decisionBodySchema },
  },
  {
    method: "get",
    path: "/v1/review/items/{id}/account-flags",
    summary: "The undecided flags of the item's account",
    description: "Roles analyst, admin. Open and claimed items of the same account, oldest first, at most 50.",
    params: item,
    answers: { 200: json("AccountFlags", accountFlagsSchema, "The account's undecided flags."), 400: error("A malformed id."), ...AUTH_ERRORS, ...NO_ITEM },
  },
  {
    method: "post",
    path: "/v1/review/items/{id}/account-decision",
    summary: "Decide flags of the item's account together",
    description:
      "Roles analyst, admin. Each named item of the account is claimed and decided as one item would be, with its own audit rows; an item claimed by someone else, already decided, of another account or past the decision-change bound is reported in `refused` and left as it is.",
    params: item,
    body: { name: "AccountDecisionRequest", schema: accountDecisionBodySchema },
    answers: {
      200: json("AccountDecision", accountDecisionSchema, "At least one item decided; the others reported."),
      ...BODY_ERRORS,
      ...AUTH_ERRORS,
      ...NO_ITEM,
      409: json(
        "AccountDecisionConflict",
        z.union([accountDecisionRefusalSchema, errorSchema]),
        "The item carries no account reference (`no-account`), or no named item could be decided (`none-decided`, with the report).",
      ),
      503: error("The review store could not be written part way; what was decided stays decided (`retryable: true`)."),
    },
  },
  {
    method: "get",
    path: "/v1/review/export",
    summary: "Export the labelled set",
    description: "Roles analyst, admin. CSV (readable by `isodense tune` / `refit` as is) or NDJSON; weight = 1/inclusion probability.",
    query: exportQuerySchema,
    answers: {
      200: { description: "The labelled set, one decided item per line, streamed.", mediaTypes: ["text/csv", "application/x-ndjson"] },
      ...QUERY_ERROR,
      ...AUTH_ERRORS,
      409: error("A feature has the name of a fixed export column; export one model version at a time."),
    },
  },
  read(
    "/v1/insights/model",
    "The model page: live and shadow versions, reports, drift, daily flag rates",
    "Roles analyst, admin.",
    json("ModelPage", modelPageSchema, "The model page."),
    modelQuerySchema,
    { ...NO_LIVE_MODEL, ...VERSION_ERRORS },
  ),
  read(
    "/v1/insights/operating",
    "Labelled operating table and estimates for a model",
    "Roles analyst, admin.",
    json("Operating", operatingSchema, "The operating table."),
    operatingQuerySchema,
    { ...NO_LIVE_MODEL, ...VERSION_ERRORS },
  ),
  read(
    "/v1/insights/shadow",
    "Live against shadow on traffic so far",
    "Roles analyst, admin.",
    json("ShadowData", shadowDataSchema, "The comparison."),
    shadowQuerySchema,
    NO_LIVE_MODEL,
  ),
  read("/v1/insights/histogram", "Score histogram of recent traffic", "Roles analyst, admin.", json("Histogram", histogramSchema, "Bucket counts."), windowQuerySchema, {
    ...NO_LIVE_MODEL,
    ...VERSION_ERRORS,
  }),
  {
    method: "post",
    path: "/v1/insights/publish-cutoff",
    summary: "Publish a new cutoff as a new version and make it live",
    description: 'Role admin. Same parameters, new cutoff; audited with who and why; needs `confirm: "publish"`.',
    body: { name: "PublishCutoffRequest", schema: publishCutoffSchema },
    answers: {
      201: json("PublishedCutoff", publishedCutoffSchema, "The new version and pointer."),
      ...BODY_ERRORS,
      ...AUTH_ERRORS,
      404: error("The version is not stored."),
      409: error("No live model, or the live version changed since the page was loaded."),
      422: error("The stored artifact does not verify."),
      503: EVENT_LOG_DOWN,
    },
  },
  {
    method: "get",
    path: "/openapi.json",
    summary: "This document",
    public: true,
    answers: {
      200: json("OpenApiDocument", openApiDocumentSchema, "OpenAPI 3.1."),
    },
  },
];

/**
 * The declared route of a method and path; undefined when none is declared.
 *
 * @param path as Hono registers it (`/v1/review/items/:id`) or in OpenAPI form (`/v1/review/items/{id}`).
 * @example operationFor("GET", "/v1/review/me")?.answers[200] // { name: "WhoAmI", schema: whoAmISchema, … }
 */
export function operationFor(method: string, path: string): Operation | undefined {
  const wanted = path.replace(/:([A-Za-z]+)/g, "{$1}");
  return OPERATIONS.find((o) => o.method === method.toLowerCase() && o.path === wanted);
}
