/**
 * The review API's contract (`/v1/review/*`): the query strings and the decision body it accepts,
 * and the answers as they travel. The worker validates with these schemas and builds answers of
 * these types; the analysts' app imports the types.
 *
 * Times are ISO-8601 UTC strings; probabilities are in [0, 1]; `mahalanobisSq` is the squared
 * Mahalanobis distance; model-unit values are after the feature transforms of the model version.
 */
import { z } from "zod";
import { modelArtifactSchema } from "../../../shared-model/src/artifact";
import { misleadingCharacter, NOTE_TEXT_RULE } from "../review/note-text";
import { ACCOUNT_FLAGS_LIMIT, EVENT_PAGE, MAX_EVENT_PAGE, MAX_NOTE_LENGTH } from "../review/settings";
import { wireReasonSchema } from "./scoring";
import { claimViewSchema, errorSchema, isoTime } from "./wire";

// ---------------------------------------------------------------------------------------------
// Requests
// ---------------------------------------------------------------------------------------------

const DATE = /^\d{4}-\d{2}-\d{2}$/;
const DATE_PREFIX = /^(\d{4})-(\d{2})-(\d{2})/;

/**
 * Whether text begins with a day that exists on the calendar: `2026-02-28` yes, `2026-02-30` and
 * `2026-13-45` no. (`Date.parse` rolls `2026-02-30T10:00:00Z` over into March, and a plain day it
 * cannot read becomes NaN, which compared with every row would empty the queue.)
 * @example isCalendarDay("2024-02-29") // true (a leap year)
 */
export function isCalendarDay(text: string): boolean {
  const match = DATE_PREFIX.exec(text);
  if (!match) return false;
  const [year, month, day] = [Number(match[1]), Number(match[2]), Number(match[3])];
  if (month < 1 || month > 12 || day < 1) return false;
  // Day 0 of the next month is the last day of this one.
  return day <= new Date(Date.UTC(year, month, 0)).getUTCDate();
}

/** A UTC day (`2026-12-01`) or an instant (`2026-12-01T10:00:00Z`) on a real calendar day. */
const dayOrInstant = z.string().refine((text) => isCalendarDay(text) && (DATE.test(text) || !Number.isNaN(Date.parse(text))), {
  error: "must be a date YYYY-MM-DD or an ISO-8601 time such as 2026-12-01T10:00:00Z, on a day that exists (month 01–12, day within the month)",
});

const shortText = (max: number) =>
  z
    .string()
    .min(1, { error: `must be 1 to ${max} characters` })
    .max(max, { error: `must be 1 to ${max} characters` });

/** Where an item stands for the team. `claimed` means a live (unexpired) claim and no decision. */
export const reviewStateSchema = z.enum(["open", "claimed", "decided"], { error: "must be open, claimed or decided" });
/** Where an item stands for the team. */
export type ReviewState = z.output<typeof reviewStateSchema>;

/** What an analyst concluded. */
export const outcomeSchema = z.enum(["fraud", "legitimate"], { error: "must be fraud or legitimate" });
/** What an analyst concluded. */
export type Outcome = z.output<typeof outcomeSchema>;

/** Why the item is in the queue: beyond the cutoff, or drawn for the random audit sample. */
export const selectionSchema = z.enum(["flagged", "audit"], { error: "must be flagged or audit" });
/** Why the item is in the queue. */
export type Selection = z.output<typeof selectionSchema>;

/** Orderings the list supports; each is served by its own index. */
export const sortKeySchema = z.enum(["priority", "tail", "amount", "age"], { error: "must be priority, tail, amount or age" });
/** Orderings the list supports. */
export type SortKey = z.output<typeof sortKeySchema>;

/** Direction of an ordering. */
export const sortDirectionSchema = z.enum(["asc", "desc"], { error: "must be asc or desc" });
/** Direction of an ordering. */
export type SortDirection = z.output<typeof sortDirectionSchema>;

/** Filters shared by the list, the counts and (partly) the export. */
const filterShape = {
  segment: shortText(64).optional(),
  modelVersion: shortText(128).optional(),
  selection: selectionSchema.optional(),
  from: dayOrInstant.optional(),
  to: dayOrInstant.optional(),
};

/** `GET /v1/review/counts`: the filters. */
export const countsQuerySchema = z.strictObject(filterShape);

/** `GET /v1/review/items`: the filters, the state, the order and a page. */
export const listQuerySchema = z.strictObject({
  ...filterShape,
  state: reviewStateSchema.default("open"),
  sort: sortKeySchema.default("priority"),
  direction: sortDirectionSchema.optional(),
  limit: z
    .string()
    .regex(/^\d{1,3}$/, { error: "must be a whole number from 1 to 200" })
    .transform(Number)
    .refine((n) => n >= 1 && n <= 200, { error: "must be a whole number from 1 to 200" })
    .default(50),
  cursor: z.string().max(512, { error: "must be at most 512 characters" }).optional(),
});

/** `GET /v1/review/export`: the format and, optionally, one model version. */
export const exportQuerySchema = z.strictObject({
  format: z.enum(["csv", "ndjson"], { error: "must be csv or ndjson" }),
  modelVersion: shortText(128).optional(),
});

/** `GET /v1/review/items/:id/events`: `before` (an event id from the previous page) and `limit`. */
export const eventsQuerySchema = z.strictObject({
  before: z
    .string()
    .regex(/^[1-9]\d{0,15}$/, { error: "must be a positive whole number (nextBefore of the previous page)" })
    .transform(Number)
    .optional(),
  limit: z
    .string()
    .regex(/^\d{1,3}$/, { error: `must be a whole number from 1 to ${MAX_EVENT_PAGE}` })
    .transform(Number)
    .refine((n) => n >= 1 && n <= MAX_EVENT_PAGE, { error: `must be a whole number from 1 to ${MAX_EVENT_PAGE}` })
    .default(EVENT_PAGE),
});

/** Body of `POST /v1/review/items/:id/decision`. */
export const decisionBodySchema = z
  .strictObject({
    outcome: outcomeSchema,
    note: z
      .string({ error: "must be a string" })
      .max(MAX_NOTE_LENGTH, { error: `must be at most ${MAX_NOTE_LENGTH} characters` })
      .superRefine((note, ctx) => {
        const found = misleadingCharacter(note);
        if (found !== null) ctx.addIssue({ code: "custom", message: `${NOTE_TEXT_RULE}; found ${found}` });
      })
      .optional()
      .describe("Why, for the audit trail; blank counts as none. Never cardholder data."),
  })
  .describe("Confirm as fraud or dismiss as legitimate.");

/** Body of a decision as the app sends it. */
export type DecisionRequest = z.input<typeof decisionBodySchema>;

/** Body of `POST /v1/review/items/:id/account-decision`: the items seen, one outcome, one note. */
export const accountDecisionBodySchema = z
  .strictObject({
    ids: z
      .array(
        z.number().refine((id) => Number.isSafeInteger(id) && id > 0, { error: "must be an item id: a positive whole number" }),
        { error: "must be a list of item ids" },
      )
      .min(1, { error: `must name 1 to ${ACCOUNT_FLAGS_LIMIT} items` })
      .max(ACCOUNT_FLAGS_LIMIT, { error: `must name 1 to ${ACCOUNT_FLAGS_LIMIT} items` })
      .refine((ids) => new Set(ids).size === ids.length, { error: "must not name an item twice" })
      .describe("The account's items the analyst saw and decides, from GET …/account-flags."),
    ...decisionBodySchema.shape,
  })
  .describe("Decide several flags of one account with one outcome.");

/** Body of an account decision as the app sends it. */
export type AccountDecisionRequest = z.input<typeof accountDecisionBodySchema>;

/**
 * Turns `from`/`to` into a half-open ms range: a day `to` includes that whole day; an instant
 * `to` is exclusive.
 * @example timeRange("2026-12-01", "2026-12-01") // { fromMs: Date.UTC(2026, 11, 1), toMs: Date.UTC(2026, 11, 2) }
 */
export function timeRange(from: string | undefined, to: string | undefined): { fromMs?: number; toMs?: number } {
  const fromMs = from === undefined ? undefined : Date.parse(DATE.test(from) ? `${from}T00:00:00Z` : from);
  const toMs = to === undefined ? undefined : DATE.test(to) ? Date.parse(`${to}T00:00:00Z`) + 86_400_000 : Date.parse(to);
  return { fromMs, toMs };
}

// ---------------------------------------------------------------------------------------------
// Answers
// ---------------------------------------------------------------------------------------------

/** `GET /v1/review/me`. */
export const whoAmISchema = z
  .strictObject({
    user: z.string(),
    role: z.enum(["analyst", "admin"]),
    claimTtlSeconds: z.number().describe("How long a claim lasts before anyone else may take the item."),
    undoWindowSeconds: z.number().describe("How long after a decision its author may undo it."),
  })
  .describe("Who is signed in, and the claim and undo windows.");
/** `GET /v1/review/me`. */
export type WhoAmI = z.output<typeof whoAmISchema>;

/** Who holds a claimed item and until when. */
export type ClaimView = z.output<typeof claimViewSchema>;

/** A decision on an item. */
export const decisionViewSchema = z.strictObject({ outcome: outcomeSchema, by: z.string(), at: isoTime, note: z.string().nullable() });
/** A decision on an item. */
export type DecisionView = z.output<typeof decisionViewSchema>;

/** One line of the queue. */
export const queueRowSchema = z.strictObject({
  id: z.number().int(),
  transactionId: z.string(),
  modelVersion: z.string(),
  segment: z.string(),
  accountRef: z.string().nullable(),
  selection: selectionSchema,
  tailProbability: z.number().describe("P(χ²ₙ > d²); 0 where it underflows a double."),
  log10TailProbability: z
    .number()
    .nullable()
    .describe('log10 of it, finite where it underflows (the "how rare" order sorts by it); null where not known (rows stored before it was kept).'),
  mahalanobisSq: z.number(),
  amount: z.number().nullable().describe("Raw `amount` feature when the model has one, else null."),
  scoredAt: isoTime,
  priority: z.number().describe("Priority right now (docs/review.md gives the formula); larger is more urgent."),
  state: reviewStateSchema,
  claim: claimViewSchema.nullable(),
  decision: decisionViewSchema.nullable(),
});
/** One line of the queue. */
export type QueueRow = z.output<typeof queueRowSchema>;

/** Counts per state. */
export const stateCountsSchema = z.strictObject({ open: z.number().int(), claimed: z.number().int(), decided: z.number().int() }).describe("Items per state under the filters.");
/** Counts per state. */
export type StateCounts = z.output<typeof stateCountsSchema>;

/** `GET /v1/review/items`. */
export const queuePageSchema = z
  .strictObject({
    items: z.array(queueRowSchema),
    nextCursor: z.string().nullable().describe("Opaque keyset cursor for the next page, or null on the last page."),
    counts: stateCountsSchema.describe("Counts per state under the same filters (state filter aside)."),
    sort: sortKeySchema,
    direction: sortDirectionSchema,
    asOf: isoTime,
  })
  .describe("A page of the queue.");
/** `GET /v1/review/items`. */
export type QueuePage = z.output<typeof queuePageSchema>;

/** One feature axis of the pair plot: the fitted feature, so the app can map ticks to raw units. */
const pairAxisSchema = z.strictObject({
  feature: modelArtifactSchema.shape.features.element,
  column: z.number().int().describe("Index of the feature's column among the model columns."),
});
/** One feature axis of the pair plot. */
export type PairAxis = z.output<typeof pairAxisSchema>;

const pair = z.tuple([z.number(), z.number()]);

/** Evidence for the scatter of the two most unusual single-column features. */
export const pairEvidenceSchema = z.strictObject({
  axes: z.tuple([pairAxisSchema, pairAxisSchema]),
  segment: z.string().describe("Segment whose Gaussian is drawn (`*` is the pooled model)."),
  mean: pair.describe("Marginal mean of the two columns, model units."),
  covariance: z.tuple([pair, pair]).describe("Marginal 2×2 covariance of the two columns (maximum likelihood, ÷ m), model units."),
  point: pair.describe("The payment in model units."),
  rawPoint: pair.describe("The payment in raw units."),
});
/** Evidence for the scatter of the two most unusual single-column features. */
export type PairEvidence = z.output<typeof pairEvidenceSchema>;

/** One earlier flag of the same account. */
export const historyRowSchema = z.strictObject({
  id: z.number().int(),
  transactionId: z.string(),
  scoredAt: isoTime,
  tailProbability: z.number(),
  log10TailProbability: z.number().nullable().describe("As on a queue line."),
  amount: z.number().nullable(),
  selection: selectionSchema,
  state: reviewStateSchema,
  outcome: outcomeSchema.nullable(),
});
/** One earlier flag of the same account. */
export type HistoryRow = z.output<typeof historyRowSchema>;

/** What an audit event records. */
export const auditActionSchema = z.enum(["claim", "release", "decide", "undo"]);
/** What an audit event records. */
export type AuditAction = z.output<typeof auditActionSchema>;

/** One row of the append-only audit trail. */
export const auditEventSchema = z.strictObject({
  id: z.number().int(),
  at: isoTime,
  actor: z.string(),
  action: auditActionSchema,
  fromOutcome: outcomeSchema.nullable(),
  toOutcome: outcomeSchema.nullable(),
  note: z.string().nullable(),
  modelVersion: z.string(),
});
/** One row of the append-only audit trail. */
export type AuditEvent = z.output<typeof auditEventSchema>;

/**
 * The payment's transaction id sent again, inside the idempotency window, with other content than
 * when first seen; the payment flow was answered 409. The content shown is the refused repeat's.
 */
export const conflictViewSchema = z.strictObject({
  at: isoTime,
  firstSeenAt: isoTime,
  modelVersion: z.string().describe("Live model when the repeat came."),
  segment: z.string().nullable(),
  accountRef: z.string().nullable(),
  features: z.record(z.string(), z.number()),
});
/** A conflicting repeat of the payment's transaction id. */
export type ConflictView = z.output<typeof conflictViewSchema>;

/** `GET /v1/review/items/:id`. */
export const itemDetailSchema = z
  .strictObject({
    item: queueRowSchema.extend({
      features: z.record(z.string(), z.number()),
      logDensity: z.number(),
      cutoffMahalanobisSq: z.number(),
      inclusionProbability: z.number(),
      receivedAt: isoTime,
    }),
    reasons: z.array(wireReasonSchema).describe("Reasons stored by the scorer when the payment was scored."),
    residuals: z.array(wireReasonSchema).nullable().describe("Standardized conditional residual of every feature, from the model artifact; null without it."),
    pair: pairEvidenceSchema.nullable(),
    evidenceGap: z.string().nullable().describe("Why `residuals` or `pair` is missing, in plain words; null when both are present."),
    history: z.array(historyRowSchema),
    events: z.array(auditEventSchema).describe("The newest audit events (at most 20), newest first; older ones from GET /v1/review/items/:id/events."),
    eventCount: z.number().int().describe("Every audit event of the item."),
    eventsNextBefore: z.number().int().nullable().describe("`before` for the next, older page of events, or null when `events` holds them all."),
    conflicts: z.array(conflictViewSchema).describe("Repeats of this transaction id with other content (newest first, at most 20)."),
    undoableUntil: isoTime.nullable().describe("Until when the caller may still undo their latest decision on this item."),
  })
  .describe("One item with its evidence.");
/** `GET /v1/review/items/:id`. */
export type ItemDetail = z.output<typeof itemDetailSchema>;

/** `GET /v1/review/items/:id/events`: a page of the audit trail, newest first. */
export const eventPageSchema = z
  .strictObject({
    events: z.array(auditEventSchema),
    count: z.number().int().describe("Every audit event of the item."),
    nextBefore: z.number().int().nullable().describe("`before` for the next, older page, or null on the last page."),
  })
  .describe("A page of an item's audit trail.");
/** `GET /v1/review/items/:id/events`. */
export type EventPage = z.output<typeof eventPageSchema>;

/** Result of claim, release, decision and undo: the item's new queue line. */
export const actionResultSchema = z.strictObject({ item: queueRowSchema, undoableUntil: isoTime.nullable() }).describe("The item after the change.");
/** Result of claim, release, decision and undo. */
export type ActionResult = z.output<typeof actionResultSchema>;

/** `GET /v1/review/summary`. */
export const daySummarySchema = z
  .strictObject({
    day: z.string().describe("UTC day the figures cover, `YYYY-MM-DD`."),
    decidedToday: z.number().int(),
    decidedTodayByMe: z.number().int(),
    open: z.number().int(),
    claimed: z.number().int(),
    capacityPerAnalyst: z.number().describe("Reviews one analyst can do in a day (var ANALYST_DAILY_CAPACITY)."),
  })
  .describe("Today's figures against the daily capacity.");
/** `GET /v1/review/summary`. */
export type DaySummary = z.output<typeof daySummarySchema>;

/** `GET /v1/review/facets`: values the filters can take. */
export const facetsSchema = z.strictObject({ segments: z.array(z.string()), modelVersions: z.array(z.string()) }).describe("Values the filters can take.");
/** `GET /v1/review/facets`. */
export type Facets = z.output<typeof facetsSchema>;

/** `GET /v1/review/items/:id/account-flags`: the undecided flags of the item's account, oldest first. */
export const accountFlagsSchema = z
  .strictObject({
    accountRef: z.string().nullable().describe("null when the item carries no account reference (then `items` is empty)."),
    items: z.array(queueRowSchema).describe("Open items and items under a live claim (anyone's), the item itself among them."),
    more: z.boolean().describe(`More undecided flags exist than the limit (${ACCOUNT_FLAGS_LIMIT}) shown.`),
  })
  .describe("The undecided flags of the item's account.");
/** `GET /v1/review/items/:id/account-flags`. */
export type AccountFlags = z.output<typeof accountFlagsSchema>;

/** One item of an account decision that was left as it was, and why. */
export const refusedItemSchema = z.strictObject({
  id: z.number().int(),
  error: z.string().describe("As for one item: `claimed-by-another`, `already-decided`, `too-many-decision-changes`, `not-found`, `other-account`."),
  rule: z.string(),
  claim: claimViewSchema.optional().describe("Who holds it, for `claimed-by-another`."),
});
/** One item of an account decision that was left as it was. */
export type RefusedItem = z.output<typeof refusedItemSchema>;

const accountDecisionShape = {
  accountRef: z.string(),
  outcome: outcomeSchema,
  decided: z.array(actionResultSchema).describe("Each decided item's new queue line, in the order asked."),
  refused: z.array(refusedItemSchema),
};

/** `POST /v1/review/items/:id/account-decision`: what was decided and what was left. */
export const accountDecisionSchema = z.strictObject(accountDecisionShape).describe("At least one item decided; the others reported.");
/** `POST /v1/review/items/:id/account-decision`. */
export type AccountDecision = z.output<typeof accountDecisionSchema>;

/** The 409 of an account decision that decided nothing: an error answer with the report. */
export const accountDecisionRefusalSchema = errorSchema.extend(accountDecisionShape).describe("No named item could be decided (`none-decided`): each with why.");
