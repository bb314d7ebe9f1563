/**
 * Erasure of one account's data on request (admin), audited in `erasure_events` without the data
 * (erasure/erase-account.ts):
 * - `DELETE /v1/accounts/{accountRef}` erases it everywhere isodense keeps it: the review store
 *   (items, notes, audit content, payment conflicts, shadow scores) and the account's history;
 * - `DELETE /v1/accounts/{accountRef}/history` erases the history alone.
 */
import { Hono, type Context } from "hono";
import type { AppEnv } from "../app-env";
import { accountHistoryEraser, eraseAccount, ERASURE_SETTINGS, type Eraser } from "../erasure/erase-account";
import { reviewStoreEraser } from "../erasure/review-store-eraser";
import { readSettings } from "../settings";
import { allow, authenticate } from "../middleware/auth";
import { problemResponse } from "../problems";
import { accountRefParamSchema, type ErasureAnswer } from "../contract";
import { parseValue } from "./validate";

/** Account routes, mounted under `/v1`. */
export const accountRoutes = new Hono<AppEnv>();

/** The error code when a store fails mid-erasure. */
const UNAVAILABLE: Record<string, string> = { "account-history": "history-unavailable", "review-store": "review-store-unavailable" };

accountRoutes.delete("/accounts/:accountRef", authenticate(), allow("admin"), (c) => erase(c, [reviewStoreEraser, accountHistoryEraser]));
accountRoutes.delete("/accounts/:accountRef/history", authenticate(), allow("admin"), (c) => erase(c, [accountHistoryEraser]));

async function erase(c: Context<AppEnv>, erasers: readonly Eraser[]): Promise<Response> {
  const accountRef = parseValue(c, "accountRef", c.req.param("accountRef"), accountRefParamSchema);
  if (accountRef instanceof Response) return accountRef;
  const settings = readSettings(c.env, ERASURE_SETTINGS);
  const outcome = await eraseAccount(c.env, settings, c.get("principal").user, accountRef, erasers);
  if (outcome.ok) return c.json({ eventId: outcome.eventId, at: outcome.at, erased: outcome.erased, ...beyondReach(outcome.erased) } satisfies ErasureAnswer);
  if (outcome.stage === "log") {
    console.error(JSON.stringify({ event: "erasure-log-unavailable", error: String(outcome.error) }));
    const rule = "the erasure could not be recorded in the review store, so nothing was erased; send the same request again";
    return problemResponse(c, 503, "erasure-log-unavailable", [{ field: "erasure_events", rule }], { retryable: true, headers: { "retry-after": "1" } });
  }
  console.error(JSON.stringify({ event: "erasure-failed", eventId: outcome.eventId, scope: outcome.scope, error: String(outcome.error) }));
  const rule =
    `the ${outcome.scope} store did not answer in time or failed (erasure event ${outcome.eventId}, marked failed, with what was erased before it); ` +
    "send the same request again: stores already erased find nothing and the rest are erased";
  return problemResponse(c, 503, UNAVAILABLE[outcome.scope] ?? "erasure-incomplete", [{ field: "accountRef", rule }], { retryable: true, headers: { "retry-after": "1" } });
}

/** What the erasure could not reach, said rather than left out (only when it applies). */
function beyondReach(erased: Record<string, Record<string, number>>): { outsideIsodense?: string } {
  const exported = erased["review-store"]?.labelsInFinishedExports ?? 0;
  if (exported === 0) return {};
  return {
    outsideIsodense:
      `${exported} of the account's labels were in label exports taken before this erasure (GET /v1/review/export, recorded in label_exports); ` +
      "isodense cannot reach those copies: erase the account's rows from them and from any model training set built on them",
  };
}
