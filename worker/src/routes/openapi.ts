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
} from "./schemas";

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
    components: { securitySchemes: { bearer: { type: "http", scheme: "bearer", description: "Per-user token from FLOW_CREDENTIALS, ANALYST_CREDENTIALS or ADMIN_CREDENTIALS." } }, schemas },
    paths: {
      "/v1/score": {
        post: operation("Score one payment", {
          description: "Role flow. Body limit 16 KiB. The answer is the same for the same (model version, body); a repeat with other content under the same transactionId answers 409.",
          requestBody: { required: true, ...json("ScoreRequest") },
          responses: {
            "200": { description: "Score, decision and reasons.", ...json("ScoreAnswer") },
            ...BODY_ERRORS,
            ...AUTH_ERRORS,
            "409": error("transactionId already scored under this model with other content."),
            "503": error("No model loaded (`no-model`) or the review hand-off failed (`handoff-failed`); `retryable: true`, see Retry-After."),
          },
        }),
      },
      "/v1/score/batch": {
        post: operation("Score up to MAX_BATCH payments", {
          description: "Role flow. Body limit 1 MiB. Each payment is scored or refused on its own; the envelope alone decides a 400.",
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
