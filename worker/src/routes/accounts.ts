/**
 * `DELETE /v1/accounts/{accountRef}/history` (admin): erases one account's payment history on
 * request, audited in `erasure_events` without the data (erasure/erase-account.ts).
 */
import { Hono } from "hono";
import type { AppEnv } from "../app-env";
import { accountHistoryEraser, eraseAccount, ERASURE_SETTINGS } from "../erasure/erase-account";
import { readSettings } from "../settings";
import { allow, authenticate } from "../middleware/auth";
import { describeValue, problemResponse } from "../problems";
import { accountRefParamSchema } from "./schemas";

/** Account routes, mounted under `/v1`. */
export const accountRoutes = new Hono<AppEnv>();

accountRoutes.delete("/accounts/:accountRef/history", authenticate(), allow("admin"), async (c) => {
  const raw = c.req.param("accountRef");
  const parsed = accountRefParamSchema.safeParse(raw);
  if (!parsed.success) {
    return problemResponse(c, 400, "invalid-request", [{ field: "accountRef", rule: `${parsed.error.issues[0].message}. Actual: ${describeValue(raw)}` }]);
  }
  const settings = readSettings(c.env, ERASURE_SETTINGS);
  const outcome = await eraseAccount(c.env, settings, c.get("principal").user, parsed.data, [accountHistoryEraser]);
  if (outcome.ok) return c.json({ eventId: outcome.eventId, at: outcome.at, erased: outcome.erased });
  if (outcome.stage === "log") {
    console.error(JSON.stringify({ event: "erasure-log-unavailable", error: String(outcome.error) }));
    const rule = "the erasure could not be recorded in the review store, so nothing was erased; send the same request again";
    return problemResponse(c, 503, "erasure-log-unavailable", [{ field: "erasure_events", rule }], { retryable: true, headers: { "retry-after": "1" } });
  }
  console.error(JSON.stringify({ event: "erasure-failed", eventId: outcome.eventId, scope: outcome.scope, error: String(outcome.error) }));
  const rule = `the ${outcome.scope} store did not answer in time or failed (erasure event ${outcome.eventId}, marked failed); send the same request again`;
  return problemResponse(c, 503, "history-unavailable", [{ field: "accountRef", rule }], { retryable: true, headers: { "retry-after": "1" } });
});
