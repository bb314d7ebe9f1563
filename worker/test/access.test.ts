/**
 * Access control, in process (./in-process.ts): malformed Authorization headers, per-user identities, JSON 404s
 * with the security headers, the OpenAPI security declarations, and configuration errors that name
 * the secret or variable without revealing its value. The role × route matrix (every route against
 * every kind of caller) is in access-matrix.test.ts.
 */
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { publishModel, type RunningWorker } from "./harness";
import { startApp } from "./in-process";
import { fitShopModel, UNUSUAL_PAYMENT } from "./fixtures";

let worker: RunningWorker;

beforeAll(async () => {
  worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0" } });
  const artifact = await fitShopModel({ version: "macc-1" });
  await publishModel(worker, artifact);
  await publishModel(worker, await fitShopModel({ version: "macc-2", seed: 3 }), false);
});
afterAll(async () => {
  await worker?.dispose();
});

interface Route {
  method: string;
  path: string;
  body?: unknown;
  /** Roles allowed; "public" when no credential is needed. */
  allowed: ("flow" | "analyst" | "admin")[] | "public";
}

const SCORE_BODY = { transactionId: "acc-1", features: UNUSUAL_PAYMENT };

const ROUTES: Route[] = [
  { method: "GET", path: "/v1/health", allowed: "public" },
  { method: "GET", path: "/openapi.json", allowed: "public" },
  { method: "POST", path: "/v1/score", body: SCORE_BODY, allowed: ["flow", "admin"] },
  { method: "POST", path: "/v1/score/batch", body: { payments: [SCORE_BODY] }, allowed: ["flow", "admin"] },
  { method: "POST", path: "/v1/echo", body: { hello: "isodense" }, allowed: ["flow", "admin"] },
  { method: "GET", path: "/v1/models", allowed: ["admin"] },
  { method: "POST", path: "/v1/models", body: { format: "not-a-model" }, allowed: ["admin"] },
  { method: "GET", path: "/v1/models/macc-1", allowed: ["admin"] },
  { method: "POST", path: "/v1/models/macc-1/activate", body: {}, allowed: ["admin"] },
  { method: "POST", path: "/v1/models/rollback", body: {}, allowed: ["admin"] },
  { method: "PUT", path: "/v1/models/shadow", body: { version: null }, allowed: ["admin"] },
];

function expectSecurityHeaders(response: Response, what: string): void {
  expect(response.headers.get("cache-control"), what).toBe("no-store");
  expect(response.headers.get("x-content-type-options"), what).toBe("nosniff");
  expect(response.headers.get("content-security-policy"), what).toContain("default-src 'none'");
  expect(response.headers.get("x-frame-options"), what).toBe("DENY");
  expect(response.headers.get("strict-transport-security"), what).toMatch(/max-age=/);
  expect(response.headers.get("content-type"), what).toMatch(/^application\/json/);
}

// Every route against every caller is in access-matrix.test.ts, which reads the route list from the app.
describe("authorization header and identities", () => {
  test("a malformed Authorization header is a 401 naming the expected form", async () => {
    for (const header of ["Basic dXNlcjpwYXNz", `Bearer ${worker.tokens.flow} extra`, "Bearer", worker.tokens.flow]) {
      const response = await worker.fetch("/v1/score", {
        method: "POST",
        headers: { "content-type": "application/json", authorization: header },
        body: JSON.stringify(SCORE_BODY),
      });
      expect(response.status, header.slice(0, 12)).toBe(401);
    }
  });

  test("the second flow user is a distinct, valid identity", async () => {
    const response = await worker.post("/v1/echo", { who: "second" }, worker.tokens.flow2);
    expect(response.status).toBe(200);
    expect(await response.json()).toEqual({ who: "second" });
  });

  test("unknown routes answer a JSON 404 with the security headers", async () => {
    const response = await worker.fetch("/v1/nothing-here", { token: worker.tokens.admin });
    expect(response.status).toBe(404);
    expectSecurityHeaders(response, "404");
    expect(await response.json()).toEqual({ error: "not-found", problems: [{ field: "path", rule: "no route answers GET /v1/nothing-here; see /openapi.json" }] });
  });
});

describe("OpenAPI document", () => {
  test("lists every route with the bearer scheme and schemas generated from zod", async () => {
    const doc = (await (await worker.fetch("/openapi.json")).json()) as {
      openapi: string;
      paths: Record<string, Record<string, { security: unknown[] }>>;
      components: { securitySchemes: Record<string, { scheme: string }>; schemas: Record<string, { properties?: Record<string, unknown>; additionalProperties?: unknown }> };
    };
    expect(doc.openapi).toBe("3.1.0");
    for (const route of ROUTES) {
      const path = route.path.replace("macc-1", "{version}");
      const operation = doc.paths[path]?.[route.method.toLowerCase()];
      expect(operation, `${route.method} ${path}`).toBeDefined();
      if (route.allowed === "public") expect(operation.security).toEqual([]);
      else expect(operation.security).toEqual([{ bearer: [] }]);
    }
    expect(doc.components.securitySchemes.bearer.scheme).toBe("bearer");
    const score = doc.components.schemas.ScoreRequest;
    expect(Object.keys(score.properties ?? {})).toEqual(["transactionId", "features", "payment", "segment", "accountRef"]);
    expect(score.additionalProperties).toBe(false);
    expect(Object.keys(doc.components.schemas.ModelArtifact.properties ?? {})).toContain("checksum");
  });
});

describe("configuration errors", () => {
  test("a malformed secret or variable is a 500 that names it and never shows its value", async () => {
    const secretValue = "checkout-without-a-colon-0123456789abcdef";
    const broken = await startApp({
      vars: { MODEL_REFRESH_SECONDS: "soon" },
      secrets: { FLOW_CREDENTIALS: secretValue },
    });
    try {
      const score = await broken.post("/v1/score", SCORE_BODY, broken.tokens.admin);
      expect(score.status).toBe(500);
      const text = await score.text();
      expect(text).not.toContain(secretValue);
      expect(JSON.parse(text)).toEqual({
        error: "configuration-error",
        problems: [{ field: "FLOW_CREDENTIALS", rule: "entry 1 must be user:token (no ':' found)" }],
      });
      const health = await broken.fetch("/v1/health");
      expect(health.status).toBe(500);
      expect(await health.json()).toEqual({
        error: "configuration-error",
        problems: [{ field: "MODEL_REFRESH_SECONDS", rule: 'must be a number of seconds from 0 to 3600 (received "soon")' }],
      });
    } finally {
      await broken.dispose();
    }
  });
});
