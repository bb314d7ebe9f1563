/**
 * `POST /v1/echo` (flow role): answers the parsed JSON body as it came. It exists for the load
 * benchmark: it goes through the same authentication, content-type, size and JSON checks as
 * `/v1/score` but does no scoring, so the difference between the two routes is the cost of
 * scoring (bench/worker-load.ts).
 */
import { Hono } from "hono";
import type { AppEnv } from "../app-env";
import { allow, authenticate } from "../middleware/auth";
import { BODY_LIMITS, jsonBody } from "../middleware/json-body";
import type { EchoBody } from "../contract";

/** Echo route, mounted under `/v1`. */
export const echoRoutes = new Hono<AppEnv>();

echoRoutes.post("/echo", authenticate(), allow("flow"), jsonBody(BODY_LIMITS.score), (c) => c.json(c.get("body") as EchoBody));
