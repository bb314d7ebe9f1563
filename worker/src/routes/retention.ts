/**
 * Retention (admin; retention/retention.ts): `POST /v1/retention/run` runs it now (after taking a
 * label export, say, rather than waiting for the cron) and answers the run; `GET /v1/retention/runs`
 * lists the latest runs with their counts and what they kept and why.
 */
import { Hono } from "hono";
import type { AppEnv } from "../app-env";
import { allow, authenticate } from "../middleware/auth";
import { problemResponse } from "../problems";
import { recentRetentionRuns, runRetention } from "../retention/retention";
import type { RetentionRun, RetentionRuns } from "../contract";

/** Retention routes, mounted under `/v1`. */
export const retentionRoutes = new Hono<AppEnv>();

/** Runs listed by `GET /v1/retention/runs`. */
const RUNS_LISTED = 20;

retentionRoutes.post("/retention/run", authenticate(), allow("admin"), async (c) => {
  const run = await runRetention(c.env, c.get("principal").user, new Date());
  if (run.status === "failed") {
    const rule = `the retention run failed and was recorded as failed; what it deleted before is counted, nothing else changed: ${"error" in (run.detail ?? {}) ? (run.detail as { error: string }).error : "see the run"}`;
    return problemResponse(c, 503, "retention-failed", [{ field: "retention", rule }], { retryable: true, headers: { "retry-after": "5" } });
  }
  return c.json(run satisfies RetentionRun);
});

retentionRoutes.get("/retention/runs", authenticate(), allow("admin"), async (c) => c.json({ runs: await recentRetentionRuns(c.env, RUNS_LISTED) } satisfies RetentionRuns));
