/**
 * `GET /v1/health` (no credential): whether a model is loaded, which one, and how loading has gone.
 * 200 when a model is loaded, 503 when none is, so a load balancer or the payment flow's circuit
 * breaker can act on the status alone. Holds no secrets: versions, times, counts, failure codes.
 */
import { Hono } from "hono";
import { recordColumns } from "../../../shared-model/src";
import type { AppEnv } from "../app-env";
import { counters } from "../scoring/counters";
import { modelCache } from "../scoring/model-cache";
import { readSettings } from "../settings";
import type { Health } from "../contract";

/** Health route, mounted under `/v1`. */
export const healthRoutes = new Hono<AppEnv>();

healthRoutes.get("/health", async (c) => {
  const { MODEL_REFRESH_SECONDS } = readSettings(c.env, ["MODEL_REFRESH_SECONDS"]);
  const snapshot = await modelCache.snapshot(c.env, MODEL_REFRESH_SECONDS * 1000);
  const status = modelCache.status();
  const body: Health = {
    status: snapshot ? "ready" : "no-model",
    model: snapshot
      ? {
          version: snapshot.live.version,
          loadedAt: snapshot.live.loadedAt,
          features: snapshot.live.compiled.features.map((f) => f.name),
          segmentBy: snapshot.live.compiled.segmentBy,
          paymentFields: snapshot.live.recordSpec ? recordColumns(snapshot.live.recordSpec) : null,
        }
      : null,
    shadow: status.shadow,
    pointer: status.pointer,
    refreshSeconds: MODEL_REFRESH_SECONDS,
    lastCheckedAt: status.lastCheckedAt,
    loadFailures: status.loadFailures,
    shadowLoadFailures: status.shadowLoadFailures,
    lastFailure: status.lastFailure,
    counters: { ...counters },
  };
  return c.json(body, snapshot ? 200 : 503);
});
