/**
 * Query-string validation shared by the review and insights routes: each parameter at most once,
 * then the route's strict zod schema; a refusal is a 400 `invalid-query` naming the parameter.
 */
import type { Context } from "hono";
import type { z } from "zod";
import type { AppEnv } from "../app-env";
import { problemResponse, problemsFromZod } from "../problems";

/**
 * The parsed query, or the 400 answer to return.
 * @param keys the schema's keys, so problems can name an unknown parameter against the known ones
 * @example const query = parseQuery(c, listQuerySchema, LIST_QUERY_KEYS); if (query instanceof Response) return query;
 */
export function parseQuery<S extends z.ZodType>(c: Context<AppEnv>, schema: S, keys: readonly string[]): z.infer<S> | Response {
  const single: Record<string, string> = {};
  for (const [name, values] of Object.entries(c.req.queries())) {
    if (values.length > 1) return problemResponse(c, 400, "invalid-query", [{ field: name, rule: `must be given once. Actual: ${values.length} times` }]);
    // defineProperty, not assignment: `single["__proto__"] = …` would set the prototype and hide
    // the parameter from the strict schema instead of refusing it as unknown.
    Object.defineProperty(single, name, { value: values[0], enumerable: true, writable: true, configurable: true });
  }
  const parsed = schema.safeParse(single);
  if (!parsed.success) return problemResponse(c, 400, "invalid-query", problemsFromZod(parsed.error, single, "", keys));
  return parsed.data;
}
