/**
 * Input validation of the routes against the API contract (worker/src/contract): the JSON body,
 * the query string and path parameters. A refusal is a 400 naming each field and the rule it broke.
 */
import type { Context } from "hono";
import type { z } from "zod";
import type { AppEnv } from "../app-env";
import { describeValue, problemResponse, problemsFromZod } from "../problems";

/**
 * The JSON body (read by `jsonBody()`) parsed by its contract schema, or the 400 answer to return.
 *
 * @param code the answer's `error` code.
 * @example const body = parseBody(c, decisionBodySchema, "invalid-body"); if (body instanceof Response) return body;
 */
export function parseBody<S extends z.ZodObject>(c: Context<AppEnv>, schema: S, code = "invalid-request"): z.output<S> | Response {
  const raw = c.get("body");
  const parsed = schema.safeParse(raw);
  if (!parsed.success) return problemResponse(c, 400, code, problemsFromZod(parsed.error, raw, "", schema));
  return parsed.data;
}

/**
 * The query string parsed by its contract schema (each parameter at most once), or the 400
 * `invalid-query` answer to return.
 *
 * @example const query = parseQuery(c, listQuerySchema); if (query instanceof Response) return query;
 */
export function parseQuery<S extends z.ZodObject>(c: Context<AppEnv>, schema: S): z.output<S> | Response {
  const single: Record<string, string> = {};
  for (const [name, values] of Object.entries(c.req.queries())) {
    if (values.length > 1) return problemResponse(c, 400, "invalid-query", [{ field: name, rule: `must be given once. Actual: ${values.length} times` }]);
    // defineProperty, not assignment: `single["__proto__"] = …` would set the prototype and hide
    // the parameter from the strict schema instead of refusing it as unknown.
    Object.defineProperty(single, name, { value: values[0], enumerable: true, writable: true, configurable: true });
  }
  const parsed = schema.safeParse(single);
  if (!parsed.success) return problemResponse(c, 400, "invalid-query", problemsFromZod(parsed.error, single, "", schema));
  return parsed.data;
}

/**
 * One value parsed by its contract schema, or the 400 answer naming `field` with the first rule it
 * broke and what came.
 *
 * @example const version = parseValue(c, "version", c.req.param("version"), versionParamSchema); if (version instanceof Response) return version;
 */
export function parseValue<S extends z.ZodType>(c: Context<AppEnv>, field: string, value: unknown, schema: S, code = "invalid-request"): z.output<S> | Response {
  const parsed = schema.safeParse(value);
  if (parsed.success) return parsed.data;
  return problemResponse(c, 400, code, [{ field, rule: `${parsed.error.issues[0].message}. Actual: ${describeValue(value)}` }]);
}
