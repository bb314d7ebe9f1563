// Worker entry point: wiring only (HTTP → Hono app, queue batches → review-store writer).
import { app } from "./app";
import type { Env } from "./env";
import { handleHandoffBatch } from "./storage/queue-consumer";

export type { Env } from "./env";
export type { HandoffMessage, ReviewMessage, ShadowMessage } from "./storage/messages";
export type { ScoreAnswer } from "./routes/schemas";

export default {
  fetch: app.fetch,
  queue: handleHandoffBatch,
} satisfies ExportedHandler<Env, unknown>;
