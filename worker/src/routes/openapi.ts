/**
 * `GET /openapi.json`: the OpenAPI 3.1 description of every route, generated from the API contract
 * (worker/src/contract/openapi.ts). Public: it describes the API and holds no data.
 */
import { Hono } from "hono";
import type { AppEnv } from "../app-env";
import { openApiDocument } from "../contract/openapi";

let cached: ReturnType<typeof openApiDocument> | undefined;

/** OpenAPI route, mounted at the root. */
export const openApiRoutes = new Hono<AppEnv>();

openApiRoutes.get("/openapi.json", (c) => {
  // Built once per isolate, on the first request that asks for it.
  cached ??= openApiDocument();
  return c.json(cached);
});
