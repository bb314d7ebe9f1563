/**
 * The OpenAPI document the app serves (in process, ./in-process.ts) describes every route the Hono app registers
 * (read from `app.routes`, so a route added later without documentation fails here), with the
 * bearer scheme on every operation but the public ones.
 */
import { afterAll, beforeAll, expect, test } from "vitest";
import { app } from "../src/app";
import type { RunningWorker } from "./harness";
import { startApp } from "./in-process";

const PUBLIC = new Set(["GET /v1/health", "GET /openapi.json"]);

let worker: RunningWorker;

beforeAll(async () => {
  worker = await startApp();
});
afterAll(async () => {
  await worker?.dispose();
});

test("every route the app registers is documented, secured unless public", async () => {
  const doc = (await (await worker.fetch("/openapi.json")).json()) as {
    paths: Record<string, Record<string, { security: unknown[]; responses: Record<string, unknown> }>>;
  };
  const routes = [...new Set(app.routes.filter((r) => r.method !== "ALL").map((r) => `${r.method} ${r.path}`))];
  expect(routes.length).toBeGreaterThan(20);
  for (const route of routes) {
    const [method, path] = route.split(" ");
    // Hono writes path parameters as :name, OpenAPI as {name}.
    const operation = doc.paths[path.replace(/:([A-Za-z]+)/g, "{$1}")]?.[method.toLowerCase()];
    expect(operation, `${route} is missing from /openapi.json`).toBeDefined();
    expect(operation.security, route).toEqual(PUBLIC.has(route) ? [] : [{ bearer: [] }]);
    expect(Object.keys(operation.responses).length, route).toBeGreaterThan(0);
  }
});
