/**
 * Building blocks every part of the API contract shares: identifier text, the error answer and
 * the active-model pointer. Pure zod (no Workers runtime), so the review app can import the types.
 */
import { z } from "zod";

/** Printable ASCII without spaces or control characters (0x21–0x7E). */
const PRINTABLE = /^[\x21-\x7e]+$/;

/**
 * An identifier: 1 to `max` printable ASCII characters without spaces; each rule names the range.
 *
 * @example identifierText(128).safeParse("pay 1").success // false: spaces are refused
 */
export function identifierText(max: number) {
  return z
    .string()
    .min(1, { error: `must be 1 to ${max} characters` })
    .max(max, { error: `must be 1 to ${max} characters` })
    .regex(PRINTABLE, { error: "must be printable ASCII without spaces (0x21–0x7E)" });
}

/** A model version in a path or a query: printable ASCII without spaces or slashes, up to 200 characters. */
export const versionParamSchema = z
  .string()
  .min(1, { error: "must be 1 to 200 characters" })
  .max(200, { error: "must be 1 to 200 characters" })
  .regex(/^[\x21-\x2e\x30-\x7e]+$/, { error: "must be printable ASCII without spaces or slashes" });

/** Any JSON value (one instance, registered once in the OpenAPI document as `JsonValue`). */
export const jsonValueSchema = z.json();

/** An ISO-8601 UTC time as the API writes it (`2026-12-01T10:00:00.000Z`). */
export const isoTime = z.string().describe("ISO-8601 UTC time.");

/** A field/rule pair: what was wrong and which rule it broke. The unit of every error answer. */
export const problemSchema = z.strictObject({
  field: z.string().describe("Dotted path (`features.amount`, `payments[3].transactionId`), header or variable name."),
  rule: z.string().describe("The rule, with what was expected and what came."),
});

/** A field/rule pair (see {@link problemSchema}). */
export type Problem = z.output<typeof problemSchema>;

/** Who holds a claimed item and until when (on a 409 of the review actions, and in queue lines). */
export const claimViewSchema = z.strictObject({ by: z.string(), until: isoTime });

/** Every 4xx/5xx answer: a stable code and each field with the rule it broke. */
export const errorSchema = z
  .strictObject({
    error: z.string().describe("Stable code, e.g. invalid-request, unauthorized, no-model."),
    problems: z.array(problemSchema),
    retryable: z.boolean().optional().describe("On 503: the same request may be retried."),
    claim: claimViewSchema.optional().describe("On a review action's 409: who holds the item and until when."),
  })
  .describe("Error answer.");

/** Body of every error answer. */
export type ErrorBody = z.output<typeof errorSchema>;

/** Versions a rollback can go back through. */
export const MAX_PREVIOUS_VERSIONS = 20;

/** The active-model pointer (`pointer:active` in KV), as stored and as the admin routes answer it. */
export const modelPointerSchema = z.strictObject({
  version: z.string().min(1).describe("Version scoring live."),
  shadow: z.string().min(1).nullable().describe("Version scoring in shadow (results recorded, never returned), or null."),
  previous: z.array(z.string().min(1)).max(MAX_PREVIOUS_VERSIONS).describe("Versions that were live before, newest first; rollback takes the first."),
  updatedAt: isoTime,
  updatedBy: z.string().describe("User who made the last change."),
});

/** The active-model pointer. */
export type ModelPointer = z.output<typeof modelPointerSchema>;
