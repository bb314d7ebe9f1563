// Worker entry point: wiring only (HTTP → Hono app, queue batches → review-store writer, cron →
// weekly drift and label-count report, retention run, audit chain check).
import { app } from "./app";
import type { Env } from "./env";
import { runWeeklyReport } from "./insights/weekly-report";
import { checkAuditChain } from "./audit/audit-chain";
import { runRetention } from "./retention/retention";
import { handleHandoffBatch } from "./storage/queue-consumer";

export type { Env } from "./env";
// Durable Object classes must be exported by the main module (wrangler.toml binds them by name).
export { AccountHistoryObject } from "./history/account-history-object";
export { IdempotencyObject } from "./idempotency/idempotency-object";
export type { HandoffMessage, ReviewMessage, ShadowMessage } from "./storage/messages";
export type { ScoreAnswer } from "./contract/scoring";

export default {
  fetch: app.fetch,
  queue: handleHandoffBatch,
  scheduled(controller, env, ctx) {
    const at = new Date(controller.scheduledTime);
    ctx.waitUntil(Promise.all([runWeeklyReport(env, controller.cron, at), runRetention(env, controller.cron, at).then(() => checkAuditChain(env))]));
  },
} satisfies ExportedHandler<Env, unknown>;
