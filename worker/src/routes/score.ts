/**
 * `POST /v1/score` and `POST /v1/score/batch`: the payment flow's synchronous call. Both run the one
 * scoring path of `scoring/score-many.ts`; the single route is a batch of one whose outcome becomes
 * the whole answer.
 */
import { Hono, type Context } from "hono";
import type { AppEnv } from "../app-env";
import { batchAccounts } from "../history/payment-form";
import { allow, authenticate } from "../middleware/auth";
import { BODY_LIMITS, jsonBody } from "../middleware/json-body";
import { problemResponse } from "../problems";
import { modelCache } from "../scoring/model-cache";
import { SCORING_SETTINGS, scoreMany, type ScoringCall } from "../scoring/score-many";
import { readSettings } from "../settings";
import { batchRequestSchema, type BatchAnswer } from "../contract/scoring";
import { parseBody } from "./validate";

/** Scoring routes, mounted under `/v1`. */
export const scoreRoutes = new Hono<AppEnv>();

scoreRoutes.post("/score", authenticate(), allow("flow"), jsonBody(BODY_LIMITS.score), async (c) => {
  const call = await scoringCall(c);
  if (call instanceof Response) return call;
  const [outcome] = await scoreMany(call, [c.get("body")], () => "");
  if (outcome.outcome === "scored") return c.json(outcome.result);
  const retry = outcome.retryable ? { retryable: true, headers: { "retry-after": "1" } } : {};
  return problemResponse(c, outcome.status, outcome.error, outcome.problems, retry);
});

scoreRoutes.post("/score/batch", authenticate(), allow("flow"), jsonBody(BODY_LIMITS.batch), async (c) => {
  const call = await scoringCall(c);
  if (call instanceof Response) return call;
  const envelope = parseBody(c, batchRequestSchema);
  if (envelope instanceof Response) return envelope;
  const payments = envelope.payments;
  if (payments.length < 1 || payments.length > call.settings.MAX_BATCH) {
    return problemResponse(c, 400, "invalid-request", [{ field: "payments", rule: `must hold 1 to ${call.settings.MAX_BATCH} payments (MAX_BATCH). Actual: ${payments.length}` }]);
  }
  const accounts = batchAccounts(payments, call.snapshot.live);
  if (accounts > call.settings.MAX_BATCH_ACCOUNTS) {
    const rule =
      `must name at most ${call.settings.MAX_BATCH_ACCOUNTS} distinct accounts in the payment form (MAX_BATCH_ACCOUNTS: each account's history is one subrequest, ` +
      `and the Workers Free plan allows 50 a request). Actual: ${accounts}; send the rest in another batch`;
    return problemResponse(c, 400, "invalid-request", [{ field: "payments", rule }]);
  }
  const results = await scoreMany(call, payments, (index) => `payments[${index}].`);
  const counts = { scored: 0, refused: 0, review: 0, auditSample: 0 };
  for (const entry of results) {
    if (entry.outcome === "refused") {
      counts.refused++;
      continue;
    }
    counts.scored++;
    if (entry.result.decision === "review") counts.review++;
    if (entry.result.auditSample) counts.auditSample++;
  }
  return c.json({ modelVersion: call.snapshot.live.version, results, counts } satisfies BatchAnswer);
});

/** The settings and models a scoring request needs, or the 503 answered when no model is loaded. */
async function scoringCall(c: Context<AppEnv>): Promise<ScoringCall | Response> {
  const settings = readSettings(c.env, SCORING_SETTINGS);
  const snapshot = await modelCache.snapshot(c.env, settings.MODEL_REFRESH_SECONDS * 1000);
  if (!snapshot) return noModel(c, settings);
  return { env: c.env, executionCtx: c.executionCtx, snapshot, settings };
}

/** 503 when no model has ever loaded in this isolate: the flow applies its fail-open/closed policy. */
function noModel(c: Context<AppEnv>, settings: ScoringCall["settings"]): Response {
  const retryAfter = String(Math.max(1, Math.ceil(settings.MODEL_REFRESH_SECONDS)));
  return problemResponse(c, 503, "no-model", [{ field: "model", rule: "no model is loaded: none has been activated, or KV cannot be read; retry after the Retry-After seconds" }], {
    retryable: true,
    headers: { "retry-after": retryAfter },
  });
}
