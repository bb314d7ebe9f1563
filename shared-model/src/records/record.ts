/**
 * One payment record as the deriver sees it, built from string cells (a CSV row) or a JSON object
 * (the edge's `payment`), with errors that name the field and the rule.
 */
import { InputError } from "../input-error";
import { describeReceived } from "../features";
import type { RecordMapping, RecordSpec } from "./spec";
import { parseTimestamp } from "./time";

/**
 * One payment record: id, time (ms since epoch, UTC), account, optional segment, and the values of
 * the other columns the spec reads (numbers; ms since epoch for timestamp columns; strings for the
 * columns only `distinct` reads).
 */
export interface PaymentRecord {
  id: string;
  timeMs: number;
  account: string;
  segment?: string;
  values: Readonly<Record<string, number | string>>;
}

/** A record field that breaks a rule: which field, and the rule with what came. */
export class RecordInputError extends InputError {
  constructor(field: string, rule: string) {
    super(field, rule, `${field} ${rule}`);
  }
}

/** How a column the spec reads is interpreted. */
export type ColumnKind = "number" | "timestamp" | "text";

/**
 * The columns a spec reads besides the record mapping, each with how it is read: a timestamp for
 * `since`, text for a column only `distinct` reads, a number otherwise.
 * @example recordValueColumns(spec) // Map { "amount" => "number", "accountCreatedAt" => "timestamp", "shipTo" => "text" }
 */
export function recordValueColumns(spec: RecordSpec): ReadonlyMap<string, ColumnKind> {
  const cached = valueColumns.get(spec);
  if (cached !== undefined) return cached;
  const kinds = new Map<string, ColumnKind>();
  const mark = (column: string, kind: ColumnKind) => {
    const held = kinds.get(column);
    // A column read two ways keeps the stricter reading: timestamp, then number, then text.
    if (held === undefined || held === "text" || (held === "number" && kind === "timestamp")) kinds.set(column, kind);
  };
  for (const { derivation: d } of spec.features) {
    if (d.kind === "read") mark(d.column, "number");
    else if (d.kind === "ratio") {
      mark(d.numerator, "number");
      mark(d.denominator, "number");
    } else if (d.kind === "since") mark(d.column, "timestamp");
    else if (d.kind === "sum" || d.kind === "vsMean") mark(d.column, "number");
    else if (d.kind === "distinct") mark(d.column, "text");
  }
  valueColumns.set(spec, kinds);
  return kinds;
}

/** Worked out once per spec object: records are read per payment, on the hot path. */
const valueColumns = new WeakMap<RecordSpec, ReadonlyMap<string, ColumnKind>>();

/**
 * Names of the ledger columns the spec reads: the record mapping's (id, time, account, segment)
 * first, then every column a derivation reads, in feature order.
 * @example recordColumns(spec) // ["paymentId", "createdAt", "accountRef", "channel", "amount", …]
 */
export function recordColumns(spec: RecordSpec): string[] {
  const mapping = spec.record ? mappingColumns(spec.record) : [];
  return [...new Set([...mapping, ...recordValueColumns(spec).keys()])];
}

function mappingColumns(record: RecordMapping): string[] {
  return [record.id, record.time, record.account, ...(record.segment === undefined ? [] : [record.segment])];
}

/** A finite decimal number, as text: optional sign, digits, optional fraction and exponent. */
const NUMBER_PATTERN = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

function readText(field: string, value: unknown): string {
  if (typeof value === "string") {
    if (value.trim() === "") throw new RecordInputError(field, "is required; got an empty value");
    return value;
  }
  if (typeof value === "number" && Number.isFinite(value)) return String(value);
  throw new RecordInputError(field, value === undefined ? "is required" : `must be a string; got ${describeReceived(value)}`);
}

function readNumber(field: string, value: unknown): number {
  if (typeof value === "number") {
    if (Number.isFinite(value)) return value;
  } else if (typeof value === "string") {
    const text = value.trim();
    if (NUMBER_PATTERN.test(text)) return Number(text);
  }
  throw new RecordInputError(field, value === undefined ? "is required" : `must be a finite number; got ${describeReceived(value)}`);
}

function readTimestamp(field: string, value: unknown): number {
  const ms = typeof value === "string" ? parseTimestamp(value.trim()) : null;
  if (ms !== null) return ms;
  throw new RecordInputError(
    field,
    value === undefined ? "is required" : `must be an ISO 8601 timestamp with Z or an offset, such as "2026-10-01T08:15:00Z"; got ${describeReceived(value)}`,
  );
}

/**
 * Builds a record from its fields: string cells (a CSV row) or JSON values (the edge's `payment`).
 * Fields the spec does not read are ignored.
 * @param spec a spec with `record`
 * @param fields the record's fields by column name
 * @throws {RecordInputError} naming the field and the rule: a missing or empty id, time, account or
 *   read column, a time that is not an ISO 8601 timestamp with an offset, a number that is not finite
 * @example recordFromFields(spec, { paymentId: "p1", createdAt: "2026-10-01T08:00:00Z", accountRef: "a1", amount: "12.50" })
 */
export function recordFromFields(spec: RecordSpec, fields: Readonly<Record<string, unknown>>): PaymentRecord {
  const mapping = spec.record;
  if (mapping === undefined) throw new RecordInputError("record", "is required in the spec to read payment records");
  const values: Record<string, number | string> = {};
  for (const [column, kind] of recordValueColumns(spec)) {
    const raw = fields[column];
    values[column] = kind === "number" ? readNumber(column, raw) : kind === "timestamp" ? readTimestamp(column, raw) : readText(column, raw);
  }
  const record: PaymentRecord = {
    id: readText(mapping.id, fields[mapping.id]),
    timeMs: readTimestamp(mapping.time, fields[mapping.time]),
    account: readText(mapping.account, fields[mapping.account]),
    values,
  };
  if (mapping.segment !== undefined) {
    const segment = fields[mapping.segment];
    if (segment !== undefined && segment !== "") record.segment = readText(mapping.segment, segment);
  }
  return record;
}
