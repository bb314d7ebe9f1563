/**
 * The privacy routes' contract: erasure of an account on request (`/v1/accounts/{accountRef}…`),
 * retention runs (`/v1/retention/…`) and the audit trail's hash-chain check (`/v1/audit/verify`).
 */
import { z } from "zod";
import { identifierText, isoTime } from "./wire";

/** An account reference in a path: printable ASCII without spaces, 1 to 128 characters. */
export const accountRefParamSchema = identifierText(128);

/** Answer of `DELETE /v1/accounts/{accountRef}` and `DELETE /v1/accounts/{accountRef}/history`. */
export const erasureAnswerSchema = z
  .strictObject({
    eventId: z.number().int().describe("Row of the erasure log (erasure_events), which keeps only a SHA-256 digest of the account reference."),
    at: isoTime,
    erased: z
      .record(z.string(), z.record(z.string(), z.number()))
      .describe(
        "Per store erased (`review-store`: items, notes, auditEvents, paymentConflicts, shadowScores, labelsInFinishedExports; `account-history`: keptPayments, foldedPayments), counts of what went; never the data.",
      ),
    outsideIsodense: z
      .string()
      .optional()
      .describe("Present when some of the account's labels left isodense in label exports taken before: those copies must be erased where they are."),
  })
  .describe("An account's data erased on request.");

/** Answer of the erasure routes. */
export type ErasureAnswer = z.output<typeof erasureAnswerSchema>;

/** One retention run: what it deleted, what it kept and why. */
export const retentionRunSchema = z
  .strictObject({
    id: z.number().int(),
    startedAt: isoTime,
    finishedAt: isoTime.nullable(),
    runBy: z.string(),
    retentionDays: z.number(),
    cutoffAt: isoTime.describe("Anything older than this was due."),
    status: z.enum(["running", "done", "more", "failed", "interrupted"]).describe("`more`: stopped at its batch limit; the next run carries on."),
    deleted: z.strictObject({
      items: z.number().int(),
      notes: z.number().int(),
      auditEvents: z.number().int(),
      paymentConflicts: z.number().int(),
      shadowScores: z.number().int(),
    }),
    keptUnexported: z.number().int().describe("Decided items past retention kept because no finished label export holds them."),
    detail: z
      .union([z.strictObject({ reason: z.string(), lastFinishedExportAt: isoTime.nullable().optional() }), z.strictObject({ error: z.string() })])
      .nullable()
      .describe("Why anything was kept, or why the run failed; null when nothing was."),
  })
  .describe("One retention run.");

/** One retention run. */
export type RetentionRun = z.output<typeof retentionRunSchema>;

/** Answer of `GET /v1/retention/runs`. */
export const retentionRunsSchema = z.strictObject({ runs: z.array(retentionRunSchema).describe("Newest first.") }).describe("The latest retention runs.");

/** Answer of `GET /v1/retention/runs`. */
export type RetentionRuns = z.output<typeof retentionRunsSchema>;

/** The first event of the audit trail that does not verify. */
export const brokenLinkSchema = z.strictObject({
  eventId: z.number().int(),
  kind: z.enum(["content-changed", "link-broken", "events-missing", "unsealed-before-sealed", "tombstone-without-digest"]),
  explanation: z.string().describe("Plain words for the operator."),
});

/** The first event that does not verify. */
export type BrokenLink = z.output<typeof brokenLinkSchema>;

/** Answer of `GET /v1/audit/verify`. */
export const chainReportSchema = z
  .strictObject({
    ok: z.boolean(),
    events: z.number().int().describe("Events checked (all of them, tombstones included)."),
    tombstones: z.number().int().describe("Of those, erased to tombstones by erasure or retention."),
    unsealed: z.number().int().describe("Events written but not sealed yet when the walk ended (sealed on the next action or run)."),
    head: z.strictObject({ eventId: z.number().int(), chain: z.string() }).nullable().describe("The last sealed event and its chain value: keep it outside D1 to compare later."),
    firstBroken: brokenLinkSchema.nullable(),
  })
  .describe("What the walk along the audit trail's hash chain found.");

/** What the audit trail's check found. */
export type ChainReport = z.output<typeof chainReportSchema>;
