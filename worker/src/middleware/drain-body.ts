/**
 * Every answer goes out after the request body has been read: whatever answers early (a 404, 405,
 * 401/403 refusal, 413, 415, a route that takes no body) leaves the unread rest of the body to this
 * one middleware, which reads it to its end (up to {@link DRAIN_LIMIT_BYTES}) and drops it before
 * the answer is returned. A client still sending when the worker decides would otherwise have its
 * connection reset under it, lose the answer and be unable to tell a refusal from a network fault
 * (found with a raw socket: worker/test/body-limit.test.ts).
 */
import type { MiddlewareHandler } from "hono";
import type { AppEnv } from "../app-env";

/**
 * Largest unread body read to its end before answering: above the largest route limit (a 5 MiB
 * model artifact) so that every refusal of a plausible request gets a clean answer. A bigger body,
 * declared or found while reading, is cut off: reading more junk is not worth a tidy answer.
 */
export const DRAIN_LIMIT_BYTES = 6 * 1024 * 1024;

/**
 * Middleware, mounted first: runs the rest of the app, then drains what is left of the body.
 * @example app.use("*", drainUnreadBody());
 */
export function drainUnreadBody(): MiddlewareHandler<AppEnv> {
  return async (c, next) => {
    await next();
    await drainRest(c.req.raw);
  };
}

/**
 * Reads and drops the part of `request`'s body nobody has read (nothing when a reader holds it or it
 * is gone); past {@link DRAIN_LIMIT_BYTES}, or when more than that is declared, cancels it instead.
 */
export async function drainRest(request: Request): Promise<void> {
  const body = request.body;
  if (body === null || body.locked) return;
  try {
    const declared = request.headers.get("content-length");
    if (declared !== null && /^\d+$/.test(declared) && Number(declared) > DRAIN_LIMIT_BYTES) {
      await body.cancel();
      return;
    }
    const reader = body.getReader();
    let left = DRAIN_LIMIT_BYTES;
    for (;;) {
      const { done, value } = await reader.read();
      if (done) return;
      left -= value.byteLength;
      if (left < 0) {
        await reader.cancel();
        return;
      }
    }
  } catch {
    /* the client went away: nobody is left to answer */
  }
}
