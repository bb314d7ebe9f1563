/**
 * The role × route access matrix, in process (./in-process.ts: the app with real local KV, D1,
 * Queues and Durable Objects).
 *
 * The route list is read from the Hono app itself (`app.routes`), so a route added later without
 * a row in {@link MATRIX} fails the first test until someone decides who may call it. Each route is
 * then called by every kind of caller — anonymous, an unknown token, the payment flow, an analyst,
 * an admin — and only the intended roles get past authentication and the role check.
 *
 * Also here: rate limiting of credential failures (429 + Retry-After, per client), the security
 * headers of the API, no token in the worker's logs, and no secret in the repository's tracked
 * files. Configuration errors and the OpenAPI security declarations stay in access.test.ts; the
 * headers of the review app's static files, which only workerd's assets path serves, are in
 * workerd/assets.test.ts.
 */
import { execFileSync } from "node:child_process";
import { readFileSync } from "node:fs";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { app } from "../src/app";
import { FAILURE_LIMIT } from "../src/middleware/credential-limiter";
import { fitShopModel, UNUSUAL_PAYMENT } from "./fixtures";
import { publishModel, repoRoot, type RunningWorker } from "./harness";
import { startApp } from "./in-process";

type Caller = "anonymous" | "unknown" | "flow" | "analyst" | "admin";
const CALLERS: Caller[] = ["anonymous", "unknown", "flow", "analyst", "admin"];

interface MatrixRow {
  /** Roles that get past authentication and the role check; "public" needs no credential. */
  allowed: ("flow" | "analyst" | "admin")[] | "public";
  /** Concrete path for the route's parameters (default: the route path itself). */
  path?: string;
  body?: unknown;
}

const SCORE_BODY = { transactionId: "matrix-1", features: UNUSUAL_PAYMENT };

/** Who may call what. Keys are `METHOD path` exactly as Hono registers them. */
const MATRIX: Record<string, MatrixRow> = {
  "GET /v1/health": { allowed: "public" },
  "GET /openapi.json": { allowed: "public" },
  "POST /v1/score": { allowed: ["flow", "admin"], body: SCORE_BODY },
  "POST /v1/score/batch": { allowed: ["flow", "admin"], body: { payments: [SCORE_BODY] } },
  "POST /v1/echo": { allowed: ["flow", "admin"], body: { hello: "isodense" } },
  "GET /v1/models": { allowed: ["admin"] },
  "POST /v1/models": { allowed: ["admin"], body: { format: "not-a-model" } },
  "GET /v1/models/:version": { allowed: ["admin"], path: "/v1/models/mmatrix-1" },
  "POST /v1/models/:version/activate": { allowed: ["admin"], path: "/v1/models/mmatrix-1/activate", body: {} },
  "POST /v1/models/rollback": { allowed: ["admin"], body: {} },
  "PUT /v1/models/shadow": { allowed: ["admin"], body: { version: null } },
  "POST /v1/models/:version/renew-report": { allowed: ["admin"], path: "/v1/models/mmatrix-1/renew-report", body: {} },
  "DELETE /v1/accounts/:accountRef/history": { allowed: ["admin"], path: "/v1/accounts/acct-matrix/history" },
  "DELETE /v1/accounts/:accountRef": { allowed: ["admin"], path: "/v1/accounts/acct-matrix" },
  "GET /v1/audit/verify": { allowed: ["admin"] },
  "POST /v1/retention/run": { allowed: ["admin"], body: {} },
  "GET /v1/retention/runs": { allowed: ["admin"] },
  "GET /v1/review/me": { allowed: ["analyst", "admin"] },
  "GET /v1/review/items": { allowed: ["analyst", "admin"] },
  "GET /v1/review/counts": { allowed: ["analyst", "admin"] },
  "GET /v1/review/facets": { allowed: ["analyst", "admin"] },
  "GET /v1/review/summary": { allowed: ["analyst", "admin"] },
  "GET /v1/review/items/:id": { allowed: ["analyst", "admin"], path: "/v1/review/items/999999" },
  "GET /v1/review/items/:id/events": { allowed: ["analyst", "admin"], path: "/v1/review/items/999999/events" },
  "POST /v1/review/items/:id/claim": { allowed: ["analyst", "admin"], path: "/v1/review/items/999999/claim", body: {} },
  "POST /v1/review/items/:id/release": { allowed: ["analyst", "admin"], path: "/v1/review/items/999999/release", body: {} },
  "POST /v1/review/items/:id/undo": { allowed: ["analyst", "admin"], path: "/v1/review/items/999999/undo", body: {} },
  "POST /v1/review/items/:id/decision": { allowed: ["analyst", "admin"], path: "/v1/review/items/999999/decision", body: { outcome: "fraud" } },
  "GET /v1/review/items/:id/account-flags": { allowed: ["analyst", "admin"], path: "/v1/review/items/999999/account-flags" },
  "POST /v1/review/items/:id/account-decision": { allowed: ["analyst", "admin"], path: "/v1/review/items/999999/account-decision", body: { ids: [999999], outcome: "fraud" } },
  "GET /v1/review/export": { allowed: ["analyst", "admin"] },
  "GET /v1/insights/model": { allowed: ["analyst", "admin"] },
  "GET /v1/insights/operating": { allowed: ["analyst", "admin"] },
  "GET /v1/insights/shadow": { allowed: ["analyst", "admin"] },
  "GET /v1/insights/histogram": { allowed: ["analyst", "admin"] },
  "POST /v1/insights/publish-cutoff": { allowed: ["admin"], body: {} },
};

/** Every concrete route of the app (middleware-only `ALL` entries left out), once each. */
function appRoutes(): string[] {
  return [...new Set(app.routes.filter((r) => r.method !== "ALL").map((r) => `${r.method} ${r.path}`))];
}

let worker: RunningWorker;
let clientCounter = 0;
/** A fresh documentation-range address per request, so the matrix never trips the limiter. */
const freshClient = () => `198.51.100.${(clientCounter++ % 250) + 1}`;

beforeAll(async () => {
  // The account-history wait is raised: this suite checks who gets past the role check, and a
  // loaded machine can take longer than production's 250 ms for a Durable Object call from here
  // (workerd/faults.test.ts tests the bound).
  worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0", HISTORY_TIMEOUT_MS: "10000" } });
  await publishModel(worker, await fitShopModel({ version: "mmatrix-1" }));
});
afterAll(async () => {
  await worker?.dispose();
});

function tokenOf(caller: Caller): string | null {
  if (caller === "anonymous") return null;
  if (caller === "unknown") return "test-unknown-0123456789abcdef0123456789abcdef";
  return worker.tokens[caller];
}

function call(method: string, path: string, body: unknown, token: string | null, client = freshClient()): Promise<Response> {
  const headers: Record<string, string> = { "cf-connecting-ip": client };
  if (body !== undefined) headers["content-type"] = "application/json";
  return worker.fetch(path, { method, headers, body: body === undefined ? undefined : JSON.stringify(body), token });
}

function expectApiHeaders(response: Response, what: string): void {
  expect(response.headers.get("cache-control"), what).toBe("no-store");
  expect(response.headers.get("x-content-type-options"), what).toBe("nosniff");
  expect(response.headers.get("content-security-policy"), what).toContain("default-src 'none'");
  expect(response.headers.get("x-frame-options"), what).toBe("DENY");
  expect(response.headers.get("strict-transport-security"), what).toMatch(/max-age=/);
  expect(response.headers.get("content-type"), what).toMatch(/^application\/(json|x-ndjson)|^text\/csv/);
}

describe("the matrix covers the app", () => {
  test("every route the app registers has a row in the matrix, and every row is a registered route", () => {
    const routes = appRoutes();
    expect(routes.length).toBeGreaterThan(10);
    const missing = routes.filter((r) => !(r in MATRIX));
    expect(missing, `routes without a matrix row (decide who may call them): ${missing.join(", ")}`).toEqual([]);
    const stale = Object.keys(MATRIX).filter((r) => !routes.includes(r));
    expect(stale, `matrix rows for routes the app no longer has: ${stale.join(", ")}`).toEqual([]);
  });
});

describe("role × route", () => {
  for (const key of Object.keys(MATRIX)) {
    const row = MATRIX[key];
    const [method, routePath] = key.split(" ");
    const path = row.path ?? routePath;
    test(`${key} lets through exactly ${row.allowed === "public" ? "everyone" : row.allowed.join(" and ")}`, async () => {
      for (const caller of CALLERS) {
        const what = `${key} as ${caller}`;
        const response = await call(method, path, row.body, tokenOf(caller));
        expectApiHeaders(response, what);
        const text = await response.text();
        const body = (response.headers.get("content-type") ?? "").startsWith("application/json")
          ? (JSON.parse(text) as { error?: string; problems?: { field: string; rule: string }[] })
          : {};
        expect(response.status, `${what} answered ${response.status}: ${text.slice(0, 200)}`).toBeLessThan(500);
        if (row.allowed === "public") {
          expect([200], what).toContain(response.status);
        } else if (caller === "anonymous" || caller === "unknown") {
          expect(response.status, what).toBe(401);
          expect(body.error, what).toBe("unauthorized");
          expect(body.problems?.[0].field, what).toBe("authorization");
          expect(response.headers.get("www-authenticate"), what).toMatch(/^Bearer realm="isodense"/);
        } else if (row.allowed.includes(caller)) {
          expect([401, 403, 429], `${what} answered ${response.status}: ${text.slice(0, 200)}`).not.toContain(response.status);
        } else {
          expect(response.status, what).toBe(403);
          expect(body.error, what).toBe("forbidden");
          expect(body.problems?.[0].rule, what).toContain(`role ${caller} may not call ${method}`);
        }
      }
    });
  }
});

describe("rate limiting of credential failures", () => {
  test(`answers 429 with Retry-After to wrong credentials after ${FAILURE_LIMIT} from one address, and never to a valid one`, async () => {
    const client = "203.0.113.50";
    for (let i = 0; i < FAILURE_LIMIT; i++) {
      const wrong = await call("POST", "/v1/score", SCORE_BODY, `test-wrong-${String(i).padStart(30, "0")}`, client);
      expect(wrong.status, `failure ${i + 1}`).toBe(401);
    }
    const limited = await call("POST", "/v1/score", SCORE_BODY, "test-wrong-one-more-000000000000000000", client);
    expect(limited.status).toBe(429);
    const retryAfter = Number(limited.headers.get("retry-after"));
    expect(retryAfter).toBeGreaterThanOrEqual(1);
    expect(retryAfter).toBeLessThanOrEqual(60);
    const body = (await limited.json()) as { error: string; problems: { field: string; rule: string }[] };
    expect(body.error).toBe("too-many-credential-failures");
    expect(body.problems[0].field).toBe("authorization");
    expect(body.problems[0].rule).toMatch(new RegExp(`^${FAILURE_LIMIT} wrong credentials from this address in the last 60 s; retry after \\d+ s$`));
    expectApiHeaders(limited, "429");
    // A malformed header from the limited address is refused the same way.
    const malformed = await worker.fetch("/v1/echo", {
      method: "POST",
      headers: { authorization: "Basic eDp5", "cf-connecting-ip": client, "content-type": "application/json" },
      body: "{}",
    });
    expect(malformed.status).toBe(429);
    // The payment flow sharing that address (a NAT, a replica with a rotated-out token) still scores.
    for (const token of [worker.tokens.flow, worker.tokens.flow2]) expect((await call("POST", "/v1/score", SCORE_BODY, token, client)).status).toBe(200);
    expect((await call("GET", "/v1/review/me", undefined, worker.tokens.analyst, client)).status).toBe(200);
    // Other addresses are unaffected; public routes stay open to the limited one.
    expect((await call("POST", "/v1/score", SCORE_BODY, "test-wrong-elsewhere-00000000000000000", "203.0.113.51")).status).toBe(401);
    expect((await call("GET", "/v1/health", undefined, null, client)).status).toBe(200);
  });

  test("counts IPv6 failures per /64, so rotating addresses inside one prefix does not escape the limit", async () => {
    for (let i = 0; i < FAILURE_LIMIT; i++) {
      const wrong = await call("GET", "/v1/review/me", undefined, `test-wrong-v6-${String(i).padStart(28, "0")}`, `2001:db8:77:1::${(i + 1).toString(16)}`);
      expect(wrong.status, `failure ${i + 1}`).toBe(401);
    }
    expect((await call("GET", "/v1/review/me", undefined, "test-wrong-v6-last-000000000000000000000", "2001:0db8:0077:0001:ffff::9")).status).toBe(429);
    expect((await call("GET", "/v1/review/me", undefined, "test-wrong-v6-next-000000000000000000000", "2001:db8:77:2::1")).status).toBe(401);
    expect((await call("GET", "/v1/review/me", undefined, worker.tokens.analyst, "2001:db8:77:1::5")).status).toBe(200);
  });

  test("does not count requests without credentials, nor right ones", async () => {
    const client = "203.0.113.60";
    for (let i = 0; i < FAILURE_LIMIT + 5; i++) {
      expect((await call("GET", "/v1/review/me", undefined, null, client)).status).toBe(401);
      expect((await call("GET", "/v1/review/me", undefined, worker.tokens.analyst, client)).status).toBe(200);
    }
  });
});

describe("secrets", () => {
  test("no token of this run appears in anything the worker logged during the matrix", () => {
    const output = worker.logs.map((l) => l.message).join("\n");
    for (const [role, token] of Object.entries(worker.tokens)) expect(output.includes(token), `${role} token in logs`).toBe(false);
    expect(output).not.toContain("test-unknown-0123456789abcdef");
  });

  test("no tracked file holds a credential that is not a demo value, and .dev.vars is not tracked", () => {
    const files = execFileSync("git", ["ls-files", "-z"], { cwd: repoRoot, encoding: "utf8" }).split("\0").filter(Boolean);
    expect(files).not.toContain(".dev.vars");
    expect(files.some((f) => f.startsWith(".state/"))).toBe(false);
    // Patterns assembled from pieces so this file does not match itself.
    const privateKey = new RegExp("-----BEGIN " + "(?:[A-Z]+ )?PRIVATE KEY-----");
    const cloudKey = new RegExp(["AK", "IA[0-9A-Z]{16}"].join(""));
    const assigned = /\b(FLOW|ANALYST|ADMIN)_CREDENTIALS\s*=\s*"([^"]*)"/g;
    const offenders: string[] = [];
    for (const file of files) {
      if (/\.(png|jpg|ico|woff2?)$/.test(file) || file.startsWith("demo-ledger/data/")) continue;
      let text: string;
      try {
        text = readFileSync(join(repoRoot, file), "utf8");
      } catch {
        continue; // deleted in the working tree
      }
      if (privateKey.test(text)) offenders.push(`${file}: private key`);
      if (cloudKey.test(text)) offenders.push(`${file}: cloud access key id`);
      for (const match of text.matchAll(assigned)) {
        for (const entry of match[2].split(",").filter((e) => e.trim() !== "")) {
          const token = entry.slice(entry.indexOf(":") + 1);
          // `${…}`: a token the script generates at run time (benchmarks), not a stored value;
          // `…` alone: a placeholder in the docs (docs/deploy.md).
          if (!token.startsWith("demo-") && !token.startsWith("${") && token !== "…") offenders.push(`${file}: ${match[1]}_CREDENTIALS entry that is not a demo value`);
        }
      }
    }
    expect(offenders).toEqual([]);
  });

  test(".dev.vars.example says its values are demo values, and each token is marked demo-", () => {
    const example = readFileSync(join(repoRoot, ".dev.vars.example"), "utf8");
    expect(example).toMatch(/DEMO CREDENTIALS FOR LOCAL DEVELOPMENT ONLY/);
    const tokens = [...example.matchAll(/^[A-Z_]+_CREDENTIALS="([^"]*)"/gm)].flatMap((m) => m[1].split(",").map((e) => e.slice(e.indexOf(":") + 1)));
    expect(tokens.length).toBeGreaterThanOrEqual(3);
    for (const token of tokens) expect(token).toMatch(/^demo-(flow|analyst|admin)-[0-9a-f]{40}$/);
  });
});
