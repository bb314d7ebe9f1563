/**
 * Error answers. Every 4xx/5xx body is `{ error: <code>, problems: [{ field, rule }] }`: a stable
 * machine-readable code, and for each problem the field (dotted path, header or variable name)
 * and the rule it broke, with what was expected and what came.
 */
import type { Context } from "hono";
import type { ContentfulStatusCode } from "hono/utils/http-status";
import type { z } from "zod";
import { formatFieldPath } from "../../shared-model/src/field-path";
import type { ErrorBody, Problem } from "./contract/wire";

/**
 * Sends an error answer.
 *
 * @example
 * return problemResponse(c, 415, "unsupported-media-type", [{ field: "content-type", rule: "must be application/json" }]);
 */
export function problemResponse(
  c: Context,
  status: ContentfulStatusCode,
  error: string,
  problems: Problem[],
  extra: { retryable?: boolean; headers?: Record<string, string> } = {},
): Response {
  const body: ErrorBody = { error, problems };
  if (extra.retryable !== undefined) body.retryable = extra.retryable;
  return c.json(body, status, extra.headers);
}

/**
 * Joins a path prefix and zod path segments into `payments[2].features.amount` form; names that are
 * not plain identifiers are quoted (`features["odd name"]`).
 *
 * @example
 * fieldPath("payments[0].", ["features", "amount"]) // → "payments[0].features.amount"
 */
export function fieldPath(prefix: string, path: readonly PropertyKey[]): string {
  return formatFieldPath(path, prefix.endsWith(".") ? prefix.slice(0, -1) : prefix) || "body";
}

/**
 * Describes a received value for an error rule: its type and, briefly, the value.
 *
 * @example
 * describeValue("12.5") // → 'string "12.5"'
 * describeValue(Infinity) // → "Infinity (a JSON number beyond ±1.8e308)"
 */
export function describeValue(value: unknown): string {
  if (value === undefined) return "nothing";
  if (value === null) return "null";
  if (Array.isArray(value)) return `an array of ${value.length}`;
  switch (typeof value) {
    case "number":
      if (Number.isNaN(value)) return "NaN";
      if (!Number.isFinite(value)) return `${value} (a JSON number beyond ±1.8e308)`;
      return `number ${value}`;
    case "string":
      return `string ${JSON.stringify(value.length > 40 ? `${value.slice(0, 40)}…` : value)}${value.length > 40 ? ` (${value.length} characters)` : ""}`;
    case "boolean":
      return `boolean ${value}`;
    case "object":
      return "an object";
    default:
      return typeof value;
  }
}

/** Reads the value at a zod path in the original input (own properties only). */
function valueAt(input: unknown, path: readonly PropertyKey[]): unknown {
  let current: unknown = input;
  for (const segment of path) {
    if (current === null || typeof current !== "object") return undefined;
    const key = typeof segment === "symbol" ? undefined : String(segment);
    if (key === undefined || !Object.hasOwn(current, key)) return undefined;
    current = (current as Record<string, unknown>)[key];
  }
  return current;
}

const EXPECTED_LABEL: Record<string, string> = {
  number: "a finite number",
  string: "a string",
  object: "an object",
  array: "an array",
  boolean: "a boolean",
};

/**
 * Turns zod issues into problems, reading the received values from the original input so that the
 * rule says what came. An unknown key's rule lists the keys `schema` (a strict object) accepts.
 *
 * @example
 * problemsFromZod(result.error, body, "", scoreRequestSchema)
 * // → [{ field: "transactionId", rule: "is required: expected a string" }]
 */
export function problemsFromZod(error: z.ZodError, input: unknown, prefix: string, schema: z.ZodObject): Problem[] {
  const problems: Problem[] = [];
  for (const issue of error.issues) {
    const received = valueAt(input, issue.path);
    switch (issue.code) {
      case "unrecognized_keys":
        for (const key of issue.keys) {
          problems.push({
            field: fieldPath(prefix, [...issue.path, key]),
            rule: `is not an accepted field; accepted: ${Object.keys(schema.shape).join(", ")}`,
          });
        }
        break;
      case "invalid_type": {
        const expected = EXPECTED_LABEL[issue.expected] ?? issue.expected;
        problems.push({
          field: fieldPath(prefix, issue.path),
          rule: received === undefined ? `is required: expected ${expected}` : `must be ${expected}. Actual: ${describeValue(received)}`,
        });
        break;
      }
      default:
        problems.push({ field: fieldPath(prefix, issue.path), rule: `${issue.message}. Actual: ${describeValue(received)}` });
    }
  }
  return problems;
}
