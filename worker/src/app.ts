/**
 * The Hono app: every answer after the request body has been read, security headers on every answer, `no-store` on the API, the routes, a JSON 404,
 * and one place that turns unknown errors into a plain 500 without internals.
 */
import { Hono } from "hono";
import type { AppEnv } from "./app-env";
import { ConfigError } from "./env";
import { drainUnreadBody } from "./middleware/drain-body";
import { noStore, securityHeaders } from "./middleware/headers";
import { problemResponse } from "./problems";
import { accountRoutes } from "./routes/accounts";
import { auditRoutes } from "./routes/audit";
import { echoRoutes } from "./routes/echo";
import { healthRoutes } from "./routes/health";
import { insightRoutes } from "./routes/insights";
import { modelRoutes } from "./routes/models";
import { openApiRoutes } from "./routes/openapi";
import { retentionRoutes } from "./routes/retention";
import { reviewRoutes } from "./routes/review";
import { scoreRoutes } from "./routes/score";

/** The worker's HTTP app. */
export const app = new Hono<AppEnv>();

// First, so that it wraps every answer, refusals and the 404 included: the body is read before any goes out.
app.use("*", drainUnreadBody());
app.use("*", securityHeaders());
app.use("*", noStore());

app.route("/v1", healthRoutes);
app.route("/v1", scoreRoutes);
app.route("/v1", echoRoutes);
app.route("/v1", modelRoutes);
app.route("/v1", accountRoutes);
app.route("/v1", auditRoutes);
app.route("/v1", retentionRoutes);
app.route("/v1/review", reviewRoutes);
app.route("/v1/insights", insightRoutes);
app.route("/", openApiRoutes);

app.notFound((c) => problemResponse(c, 404, "not-found", [{ field: "path", rule: `no route answers ${c.req.method} ${new URL(c.req.url).pathname}; see /openapi.json` }]));

app.onError((error, c) => {
  if (error instanceof ConfigError) {
    console.error(JSON.stringify({ event: "configuration-error", problems: error.problems }));
    return problemResponse(c, 500, "configuration-error", error.problems);
  }
  console.error(JSON.stringify({ event: "unhandled-error", method: c.req.method, path: new URL(c.req.url).pathname, error: String(error), stack: error.stack }));
  return problemResponse(c, 500, "internal-error", [{ field: "server", rule: "an unexpected error occurred; it has been logged" }]);
});
