/**
 * The record spec: how a ledger of payment records maps to identifying columns (`record`) and how
 * each feature's raw value is derived from a payment and the account's earlier payments. One spec
 * drives the offline `derive` over a ledger and the edge's derivation of a live payment, so the fit
 * and the scorer see the same numbers.
 *
 * JSON form (docs/features.md is the reference):
 * ```json
 * { "record": { "id": "paymentId", "time": "createdAt", "account": "accountRef", "segment": "channel" },
 *   "features": [ { "name": "paymentsLast24h", "transform": "log1p", "count": { "within": "24h" } }, … ] }
 * ```
 */
import { z } from "zod";
import { FeatureSpecError, describeReceived, expecting, featureNameSchema, featureTransformSchema, parseFeatureSpec, specProblems, type FeatureSpecProblem } from "../features";
import type { FeatureDeclaration } from "../types";
import { isKnownTimeZone } from "./local-hour";
import { DAY_MS, DURATION_PATTERN, HOUR_MS, MINUTE_MS, TIME_UNITS, UTC_OFFSET_PATTERN, parseDuration, parseUtcOffset, type TimeUnit } from "./time";

/** Ledger columns that identify a payment record (spec's top-level `record`). */
export interface RecordMapping {
  id: string;
  time: string;
  account: string;
  segment?: string;
}

/** How one feature's raw value is derived (at most one key per feature in the JSON spec). */
export type Derivation =
  | { kind: "read"; column: string }
  | { kind: "ratio"; numerator: string; denominator: string }
  | { kind: "since"; column: string; unitMs: number }
  | { kind: "count"; withinMs: number }
  | { kind: "sum"; column: string; withinMs: number }
  | { kind: "distinct"; column: string; withinMs: number }
  | { kind: "sincePrevious"; unitMs: number; none: number }
  | { kind: "vsMean"; column: string; none: number }
  | { kind: "hourOfDay"; utcOffsetMinutes: number }
  | { kind: "hourOfDay"; timeZone: string };

/** A declared feature with the derivation of its raw value. */
export interface DerivedFeatureDeclaration extends FeatureDeclaration {
  derivation: Derivation;
}

/** A parsed record spec. */
export interface RecordSpec {
  /** The identifying columns; absent for a spec over ready feature columns. */
  record?: RecordMapping;
  /** Features in model order. */
  features: DerivedFeatureDeclaration[];
  /**
   * How far before the account's latest recorded payment a payment may still arrive and be derived
   * exactly (ms). History older than the longest window plus this is folded into running totals.
   */
  latenessMs: number;
  /** How long an idle account's history is kept (ms): after this, it counts as a new account. */
  retentionMs: number;
}

/** Lateness when the spec gives none. */
export const DEFAULT_LATENESS = "1h";

/**
 * Retention when the spec gives none: history is kept at least this long (and at least the
 * longest window), so `sincePrevious` and `vsMean` see a month of idleness before an account
 * counts as new.
 */
export const DEFAULT_RETENTION = "30d";

/** The JSON keys that choose a derivation, in the order the documentation lists them. */
export const DERIVATION_KEYS = ["column", "ratio", "since", "count", "sum", "distinct", "sincePrevious", "vsMean", "hourOfDay"] as const;

/** One derivation key of the JSON spec. */
export type DerivationKey = (typeof DERIVATION_KEYS)[number];

// ---------------------------------------------------------------------------------------------
// JSON schema
// ---------------------------------------------------------------------------------------------

const columnName = z.string({ error: expecting("a column name (a string)") }).min(1, { error: "must not be empty" });
const duration = z
  .string({ error: expecting('a duration such as "30m", "24h" or "7d"') })
  .regex(DURATION_PATTERN, { error: 'must be a duration: a whole number and m, h or d, such as "30m", "24h" or "7d"' });
const unit = z.enum(Object.keys(TIME_UNITS) as [TimeUnit, ...TimeUnit[]], {
  error: (issue) => (issue.input === undefined ? "is required" : `must be one of ${Object.keys(TIME_UNITS).join(", ")}`),
});
const finiteNumber = z.number({ error: expecting("a finite number") }).refine(Number.isFinite, { error: "must be a finite number" });
const utcOffset = z
  .string({ error: expecting('a UTC offset such as "+01:00"') })
  .refine((text) => UTC_OFFSET_PATTERN.test(text) && parseUtcOffset(text) !== null, { error: 'must be a UTC offset from "-14:00" to "+14:00", such as "+01:00"' });
const timeZone = z
  .string({ error: expecting('an IANA time zone such as "Europe/Berlin"') })
  .refine(isKnownTimeZone, { error: 'must be an IANA time zone this runtime knows, such as "Europe/Berlin"' });

const objectOf = <T extends z.ZodRawShape>(shape: T, expected: string) =>
  z.strictObject(shape, { error: (issue) => (issue.code === "unrecognized_keys" ? undefined : expecting(expected)(issue)) });

/** zod schemas of each derivation key's value, in spec (JSON) form. */
export const derivationKeySchemas = {
  column: columnName,
  ratio: z.tuple([columnName, columnName], { error: expecting('a pair of column names ["numerator", "denominator"]') }),
  since: objectOf({ column: columnName, unit }, '{ "column": …, "unit": … }'),
  count: objectOf({ within: duration }, '{ "within": … }'),
  sum: objectOf({ column: columnName, within: duration }, '{ "column": …, "within": … }'),
  distinct: objectOf({ column: columnName, within: duration }, '{ "column": …, "within": … }'),
  sincePrevious: objectOf({ unit, none: finiteNumber }, '{ "unit": …, "none": … }'),
  vsMean: objectOf({ column: columnName, none: finiteNumber }, '{ "column": …, "none": … }'),
  hourOfDay: objectOf({ utcOffset: utcOffset.optional(), timeZone: timeZone.optional() }, '{ "utcOffset": … } or { "timeZone": … }').refine(
    (value) => (value.utcOffset === undefined) !== (value.timeZone === undefined),
    { error: 'must give exactly one of "utcOffset" and "timeZone"' },
  ),
} as const;

/** zod schema of the spec's `record` object (also stored in the model artifact). */
export const recordMappingSchema = objectOf(
  {
    id: columnName,
    time: columnName,
    account: columnName,
    segment: columnName.optional(),
    lateness: duration.optional(),
    retention: duration.optional(),
  },
  '{ "id": …, "time": …, "account": … }',
);

/** The spec's `record` object in JSON form. */
export type RecordMappingJson = z.infer<typeof recordMappingSchema>;

/** One feature's derivation in JSON form: a single key of {@link DERIVATION_KEYS} and its value. */
export type DerivationJson = { [K in DerivationKey]?: z.infer<(typeof derivationKeySchemas)[K]> };

const derivationShape = Object.fromEntries(DERIVATION_KEYS.map((key) => [key, derivationKeySchemas[key].optional()])) as {
  [K in DerivationKey]: z.ZodOptional<(typeof derivationKeySchemas)[K]>;
};

/** zod schema of a feature's derivation alone (at most one key), as the artifact stores it. */
export const derivationJsonSchema = z.strictObject(derivationShape).refine((value) => Object.keys(value).length <= 1, {
  error: `must hold at most one of ${DERIVATION_KEYS.join(", ")}`,
});

const featureSchema = objectOf({ name: featureNameSchema, transform: featureTransformSchema, ...derivationShape }, '{ "name": …, "transform": … } with at most one derivation key');

const specSchema = objectOf(
  {
    record: recordMappingSchema.optional(),
    features: z.array(featureSchema, { error: expecting("an array of feature objects") }).min(1, { error: "must list at least one feature" }),
  },
  '{ "features": [ … ] } with an optional "record"',
);

// ---------------------------------------------------------------------------------------------
// Parsing
// ---------------------------------------------------------------------------------------------

const FEATURE_KEYS = ["name", "transform", ...DERIVATION_KEYS].join(", ");

function allowedAt(parent: readonly PropertyKey[]): string {
  if (parent.length === 0) return "record, features";
  if (parent.length === 1 && parent[0] === "record") return "id, time, account, segment, lateness, retention";
  if (parent.length === 2) return FEATURE_KEYS;
  if (parent.length === 3) {
    const key = parent[2] as DerivationKey;
    const schema = derivationKeySchemas[key];
    if (schema && "shape" in schema) return Object.keys(schema.shape as object).join(", ");
    if (key === "hourOfDay") return "utcOffset, timeZone";
  }
  return "none";
}

/** Appends the feature's name to a problem under `features[i]`, so the message names feature and key. */
function nameFeature(json: unknown, problem: FeatureSpecProblem): FeatureSpecProblem {
  const match = /^features\[(\d+)\]/.exec(problem.field);
  if (!match) return problem;
  const feature = (json as { features?: unknown[] }).features?.[Number(match[1])] as { name?: unknown } | undefined;
  const name = feature && typeof feature === "object" && typeof feature.name === "string" ? feature.name : null;
  return name === null ? problem : { field: problem.field, rule: `${problem.rule} (feature ${JSON.stringify(name)})` };
}

function toDerivation(name: string, json: DerivationJson): Derivation {
  if (json.column !== undefined) return { kind: "read", column: json.column };
  if (json.ratio !== undefined) return { kind: "ratio", numerator: json.ratio[0], denominator: json.ratio[1] };
  if (json.since !== undefined) return { kind: "since", column: json.since.column, unitMs: TIME_UNITS[json.since.unit] };
  if (json.count !== undefined) return { kind: "count", withinMs: parseDuration(json.count.within)! };
  if (json.sum !== undefined) return { kind: "sum", column: json.sum.column, withinMs: parseDuration(json.sum.within)! };
  if (json.distinct !== undefined) return { kind: "distinct", column: json.distinct.column, withinMs: parseDuration(json.distinct.within)! };
  if (json.sincePrevious !== undefined) return { kind: "sincePrevious", unitMs: TIME_UNITS[json.sincePrevious.unit], none: json.sincePrevious.none };
  if (json.vsMean !== undefined) return { kind: "vsMean", column: json.vsMean.column, none: json.vsMean.none };
  if (json.hourOfDay !== undefined) {
    return json.hourOfDay.timeZone !== undefined
      ? { kind: "hourOfDay", timeZone: json.hourOfDay.timeZone }
      : { kind: "hourOfDay", utcOffsetMinutes: parseUtcOffset(json.hourOfDay.utcOffset!)! };
  }
  return { kind: "read", column: name };
}

/** The longest window of any derivation (ms); 0 when none has a window. */
export function longestWindowMs(features: readonly DerivedFeatureDeclaration[]): number {
  let longest = 0;
  for (const { derivation: d } of features) {
    if (d.kind === "count" || d.kind === "sum" || d.kind === "distinct") longest = Math.max(longest, d.withinMs);
  }
  return longest;
}

/**
 * Parses and validates a spec (zod). Accepts the plain feature spec (`{ "features": [ { "name",
 * "transform" } ] }`, each feature reading the column of its name) and the record spec with a
 * top-level `record` and at most one derivation key per feature.
 * @param json the decoded spec document
 * @throws {FeatureSpecError} listing every problem; each names the field (`features[3].count.within`)
 *   and the rule, with the feature's name, e.g. `must be a duration …; got "1 day" (feature "paymentsLast24h")`
 * @example parseRecordSpec({ record: { id: "id", time: "at", account: "acct" }, features: [{ name: "n24", transform: "log1p", count: { within: "24h" } }] })
 */
export function parseRecordSpec(json: unknown): RecordSpec {
  const result = specSchema.safeParse(json);
  const problems: FeatureSpecProblem[] = [];
  if (!result.success) problems.push(...specProblems(json, result.error.issues, allowedAt));
  if (result.success) {
    // Names, transforms and model columns follow the same rules as the plain feature spec.
    try {
      parseFeatureSpec({ features: result.data.features.map((f) => ({ name: f.name, transform: f.transform })) });
    } catch (err) {
      if (!(err instanceof FeatureSpecError)) throw err;
      problems.push(...err.problems);
    }
    result.data.features.forEach((feature, i) => {
      const keys = DERIVATION_KEYS.filter((key) => feature[key] !== undefined);
      if (keys.length > 1) {
        problems.push({ field: `features[${i}].${keys[1]}`, rule: `must not be given with ${keys[0]}: a feature takes at most one derivation key` });
      } else if (keys.length === 1 && result.data.record === undefined) {
        problems.push({
          field: `features[${i}].${keys[0]}`,
          rule: `needs the spec's top-level "record" (its id, time and account columns); got ${describeReceived(result.data.record)}`,
        });
      }
    });
  }
  if (problems.length > 0) throw new FeatureSpecError(problems.map((p) => nameFeature(json, p)));
  const data = result.data!;
  const features = data.features.map((f) => ({ name: f.name, transform: f.transform, derivation: toDerivation(f.name, f) }));
  const record = data.record;
  const spec: RecordSpec = {
    features,
    latenessMs: parseDuration(record?.lateness ?? DEFAULT_LATENESS)!,
    retentionMs: Math.max(longestWindowMs(features), parseDuration(record?.retention ?? DEFAULT_RETENTION)!),
  };
  if (record !== undefined) {
    spec.record = { id: record.id, time: record.time, account: record.account };
    if (record.segment !== undefined) spec.record.segment = record.segment;
  }
  return spec;
}

/**
 * Whether a spec derives from records (it has `record`), as opposed to reading ready feature columns.
 * @example derivesFromRecords(parseRecordSpec({ features: [{ name: "amount", transform: "log" }] })) // false
 */
export function derivesFromRecords(spec: RecordSpec): spec is RecordSpec & { record: RecordMapping } {
  return spec.record !== undefined;
}

/**
 * How long an idle account's history matters (ms): the retention, at least the longest window.
 * After this, the account's history may be deleted; derivations treat it as gone in any case.
 * @example historyHorizonMs(parseRecordSpec(spec)) // 2592000000 for a 30d window
 */
export function historyHorizonMs(spec: RecordSpec): number {
  return spec.retentionMs;
}

/** Writes a duration in the largest unit that states it exactly: 86400000 → "1d". */
function formatDuration(ms: number): string {
  if (ms % DAY_MS === 0) return `${ms / DAY_MS}d`;
  if (ms % HOUR_MS === 0) return `${ms / HOUR_MS}h`;
  return `${ms / MINUTE_MS}m`;
}

function unitName(unitMs: number): TimeUnit {
  return (Object.keys(TIME_UNITS) as TimeUnit[]).find((name) => TIME_UNITS[name] === unitMs)!;
}

function formatOffset(minutes: number): string {
  const abs = Math.abs(minutes);
  return `${minutes < 0 ? "-" : "+"}${String(Math.floor(abs / 60)).padStart(2, "0")}:${String(abs % 60).padStart(2, "0")}`;
}

/**
 * A feature's derivation in JSON form; `null` when it reads the column of its own name (the form
 * every spec and artifact without derivations has).
 * @example derivationJson("n24", { kind: "count", withinMs: 86400000 }) // { count: { within: "1d" } }
 */
export function derivationJson(name: string, d: Derivation): DerivationJson | null {
  switch (d.kind) {
    case "read":
      return d.column === name ? null : { column: d.column };
    case "ratio":
      return { ratio: [d.numerator, d.denominator] };
    case "since":
      return { since: { column: d.column, unit: unitName(d.unitMs) } };
    case "count":
      return { count: { within: formatDuration(d.withinMs) } };
    case "sum":
      return { sum: { column: d.column, within: formatDuration(d.withinMs) } };
    case "distinct":
      return { distinct: { column: d.column, within: formatDuration(d.withinMs) } };
    case "sincePrevious":
      return { sincePrevious: { unit: unitName(d.unitMs), none: d.none } };
    case "vsMean":
      return { vsMean: { column: d.column, none: d.none } };
    case "hourOfDay":
      return { hourOfDay: "timeZone" in d ? { timeZone: d.timeZone } : { utcOffset: formatOffset(d.utcOffsetMinutes) } };
  }
}

/**
 * The spec's `record` object in JSON form, lateness and retention written out; undefined for a
 * spec without `record`.
 * @example recordMappingJson(spec) // { id: "paymentId", time: "createdAt", account: "accountRef", lateness: "1h", retention: "30d" }
 */
export function recordMappingJson(spec: RecordSpec): RecordMappingJson | undefined {
  if (spec.record === undefined) return undefined;
  return { ...spec.record, lateness: formatDuration(spec.latenessMs), retention: formatDuration(spec.retentionMs) };
}

/**
 * The whole spec in JSON form; {@link parseRecordSpec} of it gives the same spec back.
 * @example parseRecordSpec(recordSpecJson(spec)) // equal to spec
 */
export function recordSpecJson(spec: RecordSpec): { record?: RecordMappingJson; features: Record<string, unknown>[] } {
  const record = recordMappingJson(spec);
  const features = spec.features.map((f) => ({ name: f.name, transform: f.transform, ...derivationJson(f.name, f.derivation) }));
  return record === undefined ? { features } : { record, features };
}
