/**
 * Response headers for every answer: the security headers of `hono/secure-headers`, a
 * Content-Security-Policy that lets a JSON API load nothing, and `cache-control: no-store` on the
 * API so no proxy or browser keeps scores or models.
 */
import type { MiddlewareHandler } from "hono";
import { secureHeaders } from "hono/secure-headers";
import type { AppEnv } from "../app-env";

/**
 * Security headers (HSTS, nosniff, frame denial, referrer policy, CSP `default-src 'none'`).
 * The review app's pages are static assets answered before the worker runs; their own CSP is in
 * `review-ui/public/_headers`.
 */
export function securityHeaders(): MiddlewareHandler<AppEnv> {
  return secureHeaders({
    contentSecurityPolicy: { defaultSrc: ["'none'"], frameAncestors: ["'none'"] },
    crossOriginResourcePolicy: "same-origin",
    xFrameOptions: "DENY",
  });
}

/**
 * `cache-control: no-store` on everything the route answers.
 *
 * @example
 * app.use("/v1/*", noStore());
 */
export function noStore(): MiddlewareHandler<AppEnv> {
  return async (c, next) => {
    await next();
    c.header("cache-control", "no-store");
  };
}
