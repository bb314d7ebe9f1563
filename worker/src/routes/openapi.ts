/**
 * `GET /openapi.json`: the OpenAPI 3.1 description of every route, generated from the same zod
 * schemas the routes validate with (zod 4 `z.toJSONSchema`). Public: it describes the API and
 * holds no data; every operation but health and this document declares the bearer scheme.
 */
import { Hono } from "hono";
import { z } from "zod";
import { modelArtifactSchema } from "../../../shared-model/src";
import type { AppEnv } from "../app-env";
import {
  batchAnswerSchema,
  batchRequestSchema,
  errorSchema,
  healthSchema,
  modelListSchema,
  pointerAnswerSchema,
  scoreAnswerSchema,
  scoreRequestSchema,
  shadowRequestSchema,
  erasureAnswerSchema,
} from "./schemas";
import { accountDecisionBodySchema, countsQuerySchema, decisionBodySchema, eventsQuerySchema, exportQuerySchema, listQuerySchema } from "../review/schemas";
import { modelQuerySchema, operatingQuerySchema, publishCutoffSchema, shadowQuerySchema, windowQuerySchema } from "../insights/schemas";

type Schema = z.ZodType;

const components: Record<string, Schema> = {
  ScoreRequest: scoreRequestSchema,
  ScoreAnswer: scoreAnswerSchema,
  BatchRequest: batchRequestSchema,
  BatchAnswer: batchAnswerSchema,
  Error: errorSchema,
  Health: healthSchema,
  ModelList: modelListSchema,
  ModelArtifact: modelArtifactSchema,
  Pointer: pointerAnswerSchema,
  ShadowRequest: shadowRequestSchema,
  DecisionRequest: decisionBodySchema,
  AccountDecisionRequest: accountDecisionBodySchema,
  PublishCutoffRequest: publishCutoffSchema,
  ErasureAnswer: erasureAnswerSchema,
};

const ref = (name: string) => ({ $ref: `#/components/schemas/${name}` });
const json = (name: string) => ({ content: { "application/json": { schema: ref(name) } } });
const error = (description: string) => ({ description, ...json("Error") });
const ANY_OBJECT = { content: { "application/json": { schema: { type: "object" } } } };

/** Error answers every authenticated route can give. */
const AUTH_ERRORS = {
  "401": error("Missing or unknown bearer token."),
  "403": error("The token's role may not call this route."),
  "500": error("Configuration error (names the variable or secret) or an unexpected failure."),
};
const BODY_ERRORS = {
  "400": error("Invalid JSON or a field that breaks its rule; `problems` names each field and rule."),
  "413": error("Body larger than the route's limit."),
  "415": error("Content type is not application/json."),
};

/** Query parameters of a GET route, one per key of its (strict object) zod schema. */
function queryParameters(schema: z.ZodObject): Record<string, unknown>[] {
  const properties = (z.toJSONSchema(schema, { unrepresentable: "any" }) as { properties?: Record<string, unknown> }).properties ?? {};
  return Object.entries(properties).map(([name, property]) => ({ name, in: "query", required: false, schema: property }));
}

const itemParameter = { name: "id", in: "path", required: true, schema: { type: "string", pattern: "^[1-9][0-9]{0,15}$" } };
const READ_ONLY = (summary: string, description: string, parameters: Record<string, unknown>[] = []) => ({
  get: operation(summary, {
    description,
    parameters,
    responses: { "200": { description: "JSON answer.", ...ANY_OBJECT }, "400": error("A query parameter breaks its rule."), ...AUTH_ERRORS },
  }),
});
const ITEM_ACTION = (summary: string, description: string) => ({
  post: operation(summary, {
    description,
    parameters: [itemParameter],
    responses: {
      "200": { description: "The item after the change.", ...ANY_OBJECT },
      ...AUTH_ERRORS,
      "404": error("No such item."),
      "409": error("Someone else holds the item, or its state does not allow the change."),
    },
  }),
});

/** An erasure route (DELETE on an account): its summary, what it erases, and its 503s. */
const ERASURE = (summary: string, description: string, unavailable: string) => ({
  delete: operation(summary, {
    description,
    parameters: [{ name: "accountRef", in: "path", required: true, schema: { type: "string", minLength: 1, maxLength: 128 } }],
    responses: {
      "200": { description: "Erased; counts per store.", ...json("ErasureAnswer") },
      "400": error("accountRef breaks its rule."),
      ...AUTH_ERRORS,
      "503": error(unavailable),
    },
  }),
});

const versionParameter = { name: "version", in: "path", required: true, schema: { type: "string", maxLength: 200 } };

function operation(summary: string, extra: Record<string, unknown>, secured = true) {
  return { summary, ...(secured ? { security: [{ bearer: [] }] } : { security: [] }), ...extra };
}

/**
 * Builds the document (once per isolate).
 *
 * @example
 * const doc = openApiDocument(); doc.paths["/v1/score"].post.summary // → "Score one payment"
 */
export function openApiDocument() {
  const schemas: Record<string, unknown> = {};
  for (const [name, schema] of Object.entries(components)) {
    const generated = z.toJSONSchema(schema, { target: "draft-2020-12", unrepresentable: "any", io: "input" }) as Record<string, unknown>;
    delete generated.$schema;
    schemas[name] = generated;
  }
  return {
    openapi: "3.1.0",
    info: {
      title: "isodense edge scoring service",
      version: "1",
      description:
        "Scores card-not-present payments with a multivariate Gaussian, flags the unusual ones for human review and never declines a payment. " +
        "Roles: flow (score), analyst (review queue), admin (models; may do everything).",
    },
    servers: [{ url: "/" }],
    components: {
      securitySchemes: { bearer: { type: "http", scheme: "bearer", description: "Per-user token from FLOW_CREDENTIALS, ANALYST_CREDENTIALS or ADMIN_CREDENTIALS." } },
      schemas,
    },
    paths: {
      "/v1/score": {
        post: operation("Score one payment", {
          description:
            "Role flow. Body limit 16 KiB. Send ready `features`, or a `payment` record whose features the model's record spec derives at the edge from the account's earlier payments (the payment is then recorded in the account's history; a repeated transactionId is not counted twice; the answer adds `derived`). The payment's time must lie within PAYMENT_CLOCK_TOLERANCE_SECONDS of the server clock (0: no check). The answer is the same for the same (model version, body); a repeat with other content under the same transactionId answers 409.",
          requestBody: { required: true, ...json("ScoreRequest") },
          responses: {
            "200": { description: "Score, decision and reasons.", ...json("ScoreAnswer") },
            ...BODY_ERRORS,
            ...AUTH_ERRORS,
            "409": error("transactionId already scored under this model with other content."),
            "503": error(
              "No model loaded (`no-model`), the review hand-off failed (`handoff-failed`), or the account's history did not answer within HISTORY_TIMEOUT_MS (`history-unavailable`); `retryable: true`, see Retry-After.",
            ),
          },
        }),
      },
      "/v1/score/batch": {
        post: operation("Score up to MAX_BATCH payments", {
          description:
            "Role flow. Body limit 1 MiB. Each payment (ready features or a payment record, as for /v1/score) is scored or refused on its own; the envelope alone decides a 400. Payment records of one account are derived in the order sent.",
          requestBody: { required: true, ...json("BatchRequest") },
          responses: {
            "200": { description: "One result per payment, in order.", ...json("BatchAnswer") },
            ...BODY_ERRORS,
            ...AUTH_ERRORS,
            "503": error("No model loaded."),
          },
        }),
      },
      "/v1/echo": {
        post: operation("Echo the JSON body (benchmark baseline)", {
          description: "Role flow. Same checks as /v1/score, no scoring.",
          requestBody: { required: true, ...ANY_OBJECT },
          responses: { "200": { description: "The body as parsed.", ...ANY_OBJECT }, ...BODY_ERRORS, ...AUTH_ERRORS },
        }),
      },
      "/v1/health": {
        get: operation(
          "Service health",
          { responses: { "200": { description: "A model is loaded.", ...json("Health") }, "503": { description: "No model loaded.", ...json("Health") } } },
          false,
        ),
      },
      "/v1/models": {
        get: operation("List stored model versions", {
          description: "Role admin. 50 per page; `cursor` continues.",
          parameters: [{ name: "cursor", in: "query", required: false, schema: { type: "string" } }],
          responses: { "200": { description: "Versions with their summary and the pointer.", ...json("ModelList") }, ...AUTH_ERRORS },
        }),
        post: operation("Upload a model artifact", {
          description: "Role admin. Body limit 5 MiB. Verified by the model core (schema, checksum, precision·covariance ≈ I). Versions are immutable.",
          requestBody: { required: true, ...json("ModelArtifact") },
          responses: {
            "201": { description: "Stored.", ...ANY_OBJECT },
            "200": { description: "The identical artifact was already stored.", ...ANY_OBJECT },
            ...BODY_ERRORS,
            ...AUTH_ERRORS,
            "409": error("The version is stored with other content."),
            "422": error("The artifact does not verify; `problems` lists each path and rule."),
          },
        }),
      },
      "/v1/models/{version}": {
        get: operation("Read one stored artifact", {
          parameters: [versionParameter],
          responses: { "200": { description: "The artifact and whether it is live or shadow.", ...ANY_OBJECT }, ...AUTH_ERRORS, "404": error("Not stored.") },
        }),
      },
      "/v1/models/{version}/activate": {
        post: operation("Make a stored version live", {
          parameters: [versionParameter],
          responses: {
            "200": { description: "The new pointer.", ...ANY_OBJECT },
            ...AUTH_ERRORS,
            "404": error("Not stored."),
            "422": error("The stored artifact does not verify."),
          },
        }),
      },
      "/v1/models/{version}/renew-report": {
        post: operation("File the report of an isodense renew run beside its stored candidate", {
          description:
            "Role admin. Body limit 256 KiB: the renew report (shared-model/src/renew-report.ts, format isodense.renew/v1) of a candidate published as the shadow or held back by the gate. " +
            "The same candidate and outcome are filed once.",
          parameters: [versionParameter],
          requestBody: { required: true, ...ANY_OBJECT },
          responses: {
            "201": { description: "Filed.", ...ANY_OBJECT },
            "200": { description: "This candidate's report with this outcome was already filed.", ...ANY_OBJECT },
            ...BODY_ERRORS,
            ...AUTH_ERRORS,
            "404": error("The candidate is not stored."),
            "422": error("The report names another version, or its outcome is 'unchanged'."),
          },
        }),
      },
      "/v1/models/rollback": {
        post: operation("Make the previous live version live again", {
          responses: { "200": { description: "The new pointer.", ...ANY_OBJECT }, ...AUTH_ERRORS, "409": error("No previous version.") },
        }),
      },
      "/v1/models/shadow": {
        put: operation("Set or clear the shadow model", {
          requestBody: { required: true, ...json("ShadowRequest") },
          responses: {
            "200": { description: "The new pointer.", ...ANY_OBJECT },
            ...BODY_ERRORS,
            ...AUTH_ERRORS,
            "404": error("Not stored."),
            "409": error("No live model, or the shadow equals the live version."),
            "422": error("The stored artifact does not verify."),
          },
        }),
      },
      "/v1/accounts/{accountRef}/history": ERASURE(
        "Erase one account's payment history",
        "Role admin. Deletes what the account-history store holds for the account (its payments and expiry alarm). Audited in erasure_events without the data: actor, time, SHA-256 of the account reference, stores and counts.",
        "The erasure could not be logged (nothing erased: `erasure-log-unavailable`) or the history store did not confirm it (`history-unavailable`, logged as failed); `retryable: true`.",
      ),
      "/v1/accounts/{accountRef}": ERASURE(
        "Erase one account's data everywhere isodense keeps it",
        "Role admin. Deletes the account's review items with their notes, its payment conflicts, the shadow scores of its payments, and its payment history; the audit events of its items become tombstones (content gone, hash-chain digests kept, so GET /v1/audit/verify still verifies). Whole items at a time: a decision racing the erasure lands before it (and is erased) or finds no item (404). Audited in erasure_events without the data (actor, time, SHA-256 of the account reference, counts per store). `outsideIsodense` names labels already exported, which isodense cannot reach.",
        "The erasure could not be logged (nothing erased: `erasure-log-unavailable`), or a store failed part-way (`review-store-unavailable`, `history-unavailable`; logged as failed with what went before); send it again. `retryable: true`.",
      ),
      "/v1/audit/verify": READ_ONLY(
        "Verify the review audit trail's hash chain",
        "Role admin. Seals pending events, then checks every event's digest and link from the first: `ok`, counts of events and tombstones (erased content, digests kept), the head (`eventId`, `chain`: keep it outside D1 to compare later) and `firstBroken` (the first event that does not verify, the kind of break and what it means). 200 either way.",
      ),
      "/v1/retention/runs": READ_ONLY(
        "Latest retention runs",
        "Role admin. Newest first: counts deleted per kind, items kept because no finished label export holds them, and why.",
      ),
      "/v1/retention/run": {
        post: operation("Run retention now", {
          description:
            "Role admin. Deletes what is older than RETENTION_DAYS (decided items held by a finished label export, with notes and audit content; payment conflicts; shadow scores), in batches, each counted in the run's row in the same transaction; answers the run. The weekly cron runs it too.",
          responses: {
            "200": { description: "The run: status `done`, or `more` when it stopped at its batch limit (the next run carries on).", ...ANY_OBJECT },
            ...AUTH_ERRORS,
            "503": error("The run failed part-way (`retention-failed`): what it deleted is counted, the rest is untouched; `retryable: true`."),
          },
        }),
      },
      "/v1/review/me": READ_ONLY("Who is signed in", "Roles analyst, admin."),
      "/v1/review/items": READ_ONLY("List review items", "Roles analyst, admin. Filters, sort and keyset paging with an opaque cursor.", queryParameters(listQuerySchema)),
      "/v1/review/counts": READ_ONLY("Counts per state under the filters", "Roles analyst, admin.", queryParameters(countsQuerySchema)),
      "/v1/review/facets": READ_ONLY("Values the filters can take", "Roles analyst, admin."),
      "/v1/review/summary": READ_ONLY("Today's figures against the daily capacity", "Roles analyst, admin."),
      "/v1/review/items/{id}": {
        get: operation("One item with its evidence", {
          description:
            "Roles analyst, admin. Reasons, the pair plot's marginal Gaussian, the account's recent flags, the newest 20 audit events (with the count and the cursor for older ones) and conflicting repeats of the transaction id.",
          parameters: [itemParameter],
          responses: { "200": { description: "The item and its evidence.", ...ANY_OBJECT }, ...AUTH_ERRORS, "404": error("No such item.") },
        }),
      },
      "/v1/review/items/{id}/events": {
        get: operation("A page of an item's audit trail", {
          description: "Roles analyst, admin. Newest first, `limit` (1–100, default 20) events with an id below `before`; `{ events, count, nextBefore }`.",
          parameters: [itemParameter, ...queryParameters(eventsQuerySchema)],
          responses: { "200": { description: "The page.", ...ANY_OBJECT }, "400": error("A malformed id or query."), ...AUTH_ERRORS, "404": error("No such item.") },
        }),
      },
      "/v1/review/items/{id}/claim": ITEM_ACTION("Take an item", "Roles analyst, admin. A claim lasts 15 minutes; the loser of a race gets 409 naming the holder."),
      "/v1/review/items/{id}/release": ITEM_ACTION("Give a claimed item back", "Roles analyst, admin. Only the holder may release."),
      "/v1/review/items/{id}/undo": ITEM_ACTION(
        "Undo your last decision",
        "Roles analyst, admin. Within 5 minutes; audited; 429 with Retry-After past ten decisions or undos of yours on the item within the hour.",
      ),
      "/v1/review/items/{id}/decision": {
        post: operation("Confirm as fraud or dismiss as legitimate", {
          description: "Roles analyst, admin. Needs your live claim; every change is appended to the audit trail.",
          parameters: [itemParameter],
          requestBody: { required: true, ...json("DecisionRequest") },
          responses: {
            "200": { description: "The item after the decision.", ...ANY_OBJECT },
            ...BODY_ERRORS,
            ...AUTH_ERRORS,
            "404": error("No such item."),
            "409": error("No live claim of yours on the item."),
            "429": error("Ten decisions or undos of yours on this item within the hour; Retry-After says when."),
          },
        }),
      },
      "/v1/review/items/{id}/account-flags": {
        get: operation("The undecided flags of the item's account", {
          description: "Roles analyst, admin. Open and claimed items of the same account, oldest first, at most 50; `{ accountRef, items, more }`.",
          parameters: [itemParameter],
          responses: { "200": { description: "The account's undecided flags.", ...ANY_OBJECT }, "400": error("A malformed id."), ...AUTH_ERRORS, "404": error("No such item.") },
        }),
      },
      "/v1/review/items/{id}/account-decision": {
        post: operation("Decide flags of the item's account together", {
          description:
            "Roles analyst, admin. `{ ids, outcome, note? }`: each named item of the account is claimed and decided as one item would be, with its own audit rows; " +
            "an item claimed by someone else, already decided, of another account or past the decision-change bound is reported in `refused` and left as it is. " +
            "Answers `{ accountRef, outcome, decided, refused }`.",
          parameters: [itemParameter],
          requestBody: { required: true, ...json("AccountDecisionRequest") },
          responses: {
            "200": { description: "At least one item decided; the others reported.", ...ANY_OBJECT },
            ...BODY_ERRORS,
            ...AUTH_ERRORS,
            "404": error("No such item."),
            "409": error("The item carries no account reference (`no-account`), or no named item could be decided (`none-decided`, with the report)."),
          },
        }),
      },
      "/v1/review/export": {
        get: operation("Export the labelled set", {
          description: "Roles analyst, admin. CSV (readable by `isodense tune` / `refit` as is) or NDJSON; weight = 1/inclusion probability.",
          parameters: queryParameters(exportQuerySchema),
          responses: { "200": { description: "text/csv or application/x-ndjson." }, "400": error("A query parameter breaks its rule."), ...AUTH_ERRORS },
        }),
      },
      "/v1/insights/model": READ_ONLY("The model page: live and shadow versions, reports, drift, daily flag rates", "Roles analyst, admin.", queryParameters(modelQuerySchema)),
      "/v1/insights/operating": READ_ONLY("Labelled operating table and estimates for a model", "Roles analyst, admin.", queryParameters(operatingQuerySchema)),
      "/v1/insights/shadow": READ_ONLY("Live against shadow on traffic so far", "Roles analyst, admin.", queryParameters(shadowQuerySchema)),
      "/v1/insights/histogram": READ_ONLY("Score histogram of recent traffic", "Roles analyst, admin.", queryParameters(windowQuerySchema)),
      "/v1/insights/publish-cutoff": {
        post: operation("Publish a new cutoff as a new version and make it live", {
          description: 'Role admin. Same parameters, new cutoff; audited with who and why; needs `confirm: "publish"`.',
          requestBody: { required: true, ...json("PublishCutoffRequest") },
          responses: {
            "201": { description: "The new version and pointer.", ...ANY_OBJECT },
            ...BODY_ERRORS,
            ...AUTH_ERRORS,
            "404": error("The version is not stored."),
            "409": error("No live model, or the live version changed since the page was loaded."),
            "422": error("The stored artifact does not verify."),
          },
        }),
      },
      "/openapi.json": {
        get: operation("This document", { responses: { "200": { description: "OpenAPI 3.1.", ...ANY_OBJECT } } }, false),
      },
    },
  };
}

let cached: ReturnType<typeof openApiDocument> | undefined;

/** OpenAPI route, mounted at the root. */
export const openApiRoutes = new Hono<AppEnv>();

openApiRoutes.get("/openapi.json", (c) => {
  cached ??= openApiDocument();
  return c.json(cached);
});
