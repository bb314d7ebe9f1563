/**
 * zod schemas of the review API's inputs: the list and count query strings, the decision body, the
 * export query. Rules are worded as the `rule` of a 4xx problem ("must be one of …").
 */
import { z } from "zod";
import { misleadingCharacter, NOTE_TEXT_RULE } from "./note-text";
import { ACCOUNT_FLAGS_LIMIT, EVENT_PAGE, MAX_EVENT_PAGE, MAX_NOTE_LENGTH } from "./settings";

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

/** A UTC day (`2026-12-01`) or an instant (`2026-12-01T10:00:00Z`) on a real calendar day; parsed to ms. */
const dayOrInstant = z.string().refine((text) => isCalendarDay(text) && (DATE.test(text) || !Number.isNaN(Date.parse(text))), {
  error: "must be a date YYYY-MM-DD or an ISO-8601 time such as 2026-12-01T10:00:00Z, on a day that exists (month 01–12, day within the month)",
});

const shortText = (max: number) =>
  z
    .string()
    .min(1, { error: `must be 1 to ${max} characters` })
    .max(max, { error: `must be 1 to ${max} characters` });

/** Filters shared by the list, the counts and (partly) the export. */
const filterShape = {
  segment: shortText(64).optional(),
  modelVersion: shortText(128).optional(),
  selection: z.enum(["flagged", "audit"], { error: "must be flagged or audit" }).optional(),
  from: dayOrInstant.optional(),
  to: dayOrInstant.optional(),
};

export const countsQuerySchema = z.strictObject(filterShape);

export const listQuerySchema = z.strictObject({
  ...filterShape,
  state: z.enum(["open", "claimed", "decided"], { error: "must be open, claimed or decided" }).default("open"),
  sort: z.enum(["priority", "tail", "amount", "age"], { error: "must be priority, tail, amount or age" }).default("priority"),
  direction: z.enum(["asc", "desc"], { error: "must be asc or desc" }).optional(),
  limit: z
    .string()
    .regex(/^\d{1,3}$/, { error: "must be a whole number from 1 to 200" })
    .transform(Number)
    .refine((n) => n >= 1 && n <= 200, { error: "must be a whole number from 1 to 200" })
    .default(50),
  cursor: z.string().max(512, { error: "must be at most 512 characters" }).optional(),
});

export const exportQuerySchema = z.strictObject({
  format: z.enum(["csv", "ndjson"], { error: "must be csv or ndjson" }),
  modelVersion: shortText(128).optional(),
});

/** GET /v1/review/items/:id/events: `before` (an event id from the previous page) and `limit`. */
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

export const EVENTS_QUERY_KEYS = Object.keys(eventsQuerySchema.shape);
export const LIST_QUERY_KEYS = Object.keys(listQuerySchema.shape);
export const COUNTS_QUERY_KEYS = Object.keys(countsQuerySchema.shape);
export const EXPORT_QUERY_KEYS = Object.keys(exportQuerySchema.shape);

export const decisionBodySchema = z.strictObject({
  outcome: z.enum(["fraud", "legitimate"], { error: "must be fraud or legitimate" }),
  note: z
    .string({ error: "must be a string" })
    .max(MAX_NOTE_LENGTH, { error: `must be at most ${MAX_NOTE_LENGTH} characters` })
    .superRefine((note, ctx) => {
      const found = misleadingCharacter(note);
      if (found !== null) ctx.addIssue({ code: "custom", message: `${NOTE_TEXT_RULE}; found ${found}` });
    })
    .optional(),
});

export const DECISION_BODY_KEYS = ["outcome", "note"];

/** Body of POST /v1/review/items/:id/account-decision: the items seen, one outcome, one note. */
export const accountDecisionBodySchema = decisionBodySchema.extend({
  ids: z
    .array(
      z.number().refine((id) => Number.isSafeInteger(id) && id > 0, { error: "must be an item id: a positive whole number" }),
      { error: "must be a list of item ids" },
    )
    .min(1, { error: `must name 1 to ${ACCOUNT_FLAGS_LIMIT} items` })
    .max(ACCOUNT_FLAGS_LIMIT, { error: `must name 1 to ${ACCOUNT_FLAGS_LIMIT} items` })
    .refine((ids) => new Set(ids).size === ids.length, { error: "must not name an item twice" }),
});

export const ACCOUNT_DECISION_BODY_KEYS = ["ids", ...DECISION_BODY_KEYS];

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
