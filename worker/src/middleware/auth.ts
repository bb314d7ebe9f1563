/**
 * Authentication and role checks for the API routes. Missing or unknown bearer token → 401;
 * known token but a role the route does not allow → 403. Admins pass every role check.
 */
import type { MiddlewareHandler } from "hono";
import type { AppEnv } from "../app-env";
import { problemResponse } from "../problems";
import { clientKey, credentialFailures } from "./credential-limiter";
import { credentialTable, type Role } from "./credentials";

const CHALLENGE = { "www-authenticate": 'Bearer realm="isodense"' };

/**
 * Establishes the caller from `Authorization: Bearer <token>` and stores `{ role, user }` as
 * `principal` in the context.
 *
 * @example
 * app.use("/v1/score", authenticate());
 */
export function authenticate(): MiddlewareHandler<AppEnv> {
  return async (c, next) => {
    const header = c.req.header("authorization");
    if (header === undefined) {
      return problemResponse(c, 401, "unauthorized", [{ field: "authorization", rule: "is required: expected 'Bearer <token>'" }], { headers: CHALLENGE });
    }
    // The token is always checked: a valid credential passes whatever its address's failure count
    // (others behind the same NAT must not lock the payment flow out); a failing one is counted,
    // and refused with 429 while its address is over the limit.
    const client = clientKey(c.req.raw.headers);
    const match = /^Bearer[ ]+([^\s]+)\s*$/i.exec(header);
    const principal = match ? await (await credentialTable(c.env)).identify(match[1]) : null;
    if (principal === null) {
      const now = Date.now();
      const verdict = credentialFailures.check(client, now);
      if (verdict.limited) {
        return problemResponse(
          c,
          429,
          "too-many-credential-failures",
          [{ field: "authorization", rule: `${verdict.failures} wrong credentials from this address in the last 60 s; retry after ${verdict.retryAfterSeconds} s` }],
          { headers: { "retry-after": String(verdict.retryAfterSeconds) } },
        );
      }
      credentialFailures.recordFailure(client, now);
      if (!match) {
        return problemResponse(c, 401, "unauthorized", [{ field: "authorization", rule: "must be 'Bearer <token>' (one token, Bearer scheme)" }], {
          headers: CHALLENGE,
        });
      }
      return problemResponse(c, 401, "unauthorized", [{ field: "authorization", rule: "the bearer token is not a known credential" }], {
        headers: { "www-authenticate": 'Bearer realm="isodense", error="invalid_token"' },
      });
    }
    c.set("principal", principal);
    await next();
  };
}

/**
 * Lets through callers whose role is listed; admins always pass.
 *
 * @example
 * app.post("/v1/score", authenticate(), allow("flow"), handler);
 */
export function allow(...roles: Role[]): MiddlewareHandler<AppEnv> {
  const allowed = new Set<Role>([...roles, "admin"]);
  const names = [...allowed].join(", ");
  return async (c, next) => {
    const principal = c.get("principal");
    if (!allowed.has(principal.role)) {
      return problemResponse(c, 403, "forbidden", [
        { field: "authorization", rule: `role ${principal.role} may not call ${c.req.method} ${new URL(c.req.url).pathname}; allowed roles: ${names}` },
      ]);
    }
    await next();
  };
}
