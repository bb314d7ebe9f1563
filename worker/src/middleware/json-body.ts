/**
 * Reads a JSON request body with three checks, in this order, each answered with its own status:
 * the content type must be `application/json`, with no charset or `charset=utf-8` (415: a body
 * declared as UTF-16 or Latin-1 would otherwise be read as UTF-8 and mean something else), the body must fit the route's byte limit
 * (413, checked on the declared length and again while streaming, so a lying or absent
 * Content-Length cannot get past it), and it must be UTF-8 JSON (400). A refused body is left
 * unread here: `drain-body.ts` reads the rest of every body before any answer goes out. The parsed value is stored
 * as `body` in the context; nothing has been stored anywhere when one of these checks refuses.
 */
import type { MiddlewareHandler } from "hono";
import type { AppEnv } from "../app-env";
import { problemResponse } from "../problems";

/** Byte limits of the routes that take a body. */
export const BODY_LIMITS = {
  /** One payment: 16 KiB holds ~250 features with long names. */
  score: 16 * 1024,
  /** A batch: 1 MiB, about 100 payments of 10 KiB. */
  batch: 1024 * 1024,
  /** A model artifact: 5 MiB holds 256 columns × several segments of full matrices. */
  artifact: 5 * 1024 * 1024,
  /** A renew report: 256 KiB holds the drift table of a model with hundreds of columns. */
  renewReport: 256 * 1024,
  /** Small admin bodies (shadow). */
  small: 4 * 1024,
} as const;

/**
 * Middleware that enforces content type, size and JSON syntax, then sets `body`.
 *
 * @param limitBytes largest accepted body in bytes.
 * @example
 * app.post("/v1/score", authenticate(), allow("flow"), jsonBody(BODY_LIMITS.score), handler);
 */
export function jsonBody(limitBytes: number): MiddlewareHandler<AppEnv> {
  return async (c, next) => {
    const contentType = c.req.header("content-type");
    const mediaType = contentType?.split(";")[0].trim().toLowerCase();
    if (mediaType !== "application/json") {
      return problemResponse(c, 415, "unsupported-media-type", [
        {
          field: "content-type",
          rule: `must be application/json. Actual: ${contentType === undefined ? "no content-type header" : JSON.stringify(contentType.slice(0, 80))}`,
        },
      ]);
    }
    const charset = declaredCharset(contentType!);
    if (charset !== null && charset !== "utf-8" && charset !== "utf8") {
      return problemResponse(c, 415, "unsupported-media-type", [
        { field: "content-type", rule: `must declare charset=utf-8 or no charset (JSON is UTF-8, RFC 8259). Actual: charset=${JSON.stringify(charset.slice(0, 40))}` },
      ]);
    }
    const declared = c.req.header("content-length");
    if (declared !== undefined && /^\d+$/.test(declared) && Number(declared) > limitBytes) {
      return tooLarge(c, limitBytes, `${declared} bytes declared`);
    }
    const bytes = await readLimited(c.req.raw, limitBytes);
    if (bytes === null) return tooLarge(c, limitBytes, "more than that was sent");
    let text: string;
    try {
      text = new TextDecoder("utf-8", { fatal: true, ignoreBOM: false }).decode(bytes);
    } catch {
      return problemResponse(c, 400, "invalid-json", [{ field: "body", rule: "must be UTF-8 encoded JSON. Actual: bytes that are not valid UTF-8" }]);
    }
    if (text.trim() === "") {
      return problemResponse(c, 400, "invalid-json", [{ field: "body", rule: "must be a JSON document. Actual: an empty body" }]);
    }
    let value: unknown;
    try {
      value = JSON.parse(text);
    } catch (error) {
      return problemResponse(c, 400, "invalid-json", [{ field: "body", rule: `must be valid JSON. Actual: ${(error as Error).message}` }]);
    }
    c.set("body", value);
    await next();
  };
}

/** The `charset` parameter of a content type, lower-cased and unquoted; null when there is none. */
function declaredCharset(contentType: string): string | null {
  for (const parameter of contentType.split(";").slice(1)) {
    const equals = parameter.indexOf("=");
    if (equals < 0 || parameter.slice(0, equals).trim().toLowerCase() !== "charset") continue;
    return parameter
      .slice(equals + 1)
      .trim()
      .replace(/^"(.*)"$/, "$1")
      .toLowerCase();
  }
  return null;
}

function tooLarge(c: Parameters<MiddlewareHandler<AppEnv>>[0], limitBytes: number, actual: string): Response {
  return problemResponse(c, 413, "payload-too-large", [{ field: "body", rule: `must be at most ${limitBytes} bytes. Actual: ${actual}` }]);
}

/** Reads the whole body, or returns null when it exceeds `limitBytes` (the rest is left to drain-body). */
async function readLimited(request: Request, limitBytes: number): Promise<Uint8Array | null> {
  if (request.body === null) return new Uint8Array(0);
  const reader = request.body.getReader();
  const chunks: Uint8Array[] = [];
  let total = 0;
  for (;;) {
    const { done, value } = await reader.read();
    if (done) break;
    total += value.byteLength;
    if (total > limitBytes) {
      reader.releaseLock();
      return null;
    }
    chunks.push(value);
  }
  if (chunks.length === 1) return chunks[0];
  const out = new Uint8Array(total);
  let offset = 0;
  for (const chunk of chunks) {
    out.set(chunk, offset);
    offset += chunk.byteLength;
  }
  return out;
}
