/**
 * The `payment` form of a score request: a payment record (the ledger's columns) instead of ready
 * features. The record is read with the shared model's `recordFromFields`, the same code the CLI's
 * `derive` applies to a ledger, so the edge and the fit see one definition; the history features
 * are then derived at the account's Durable Object (`history-client.ts`).
 */
import { rawVectorFromRecord, recordColumns, recordFromFields, RecordInputError, type PaymentRecord } from "../../../shared-model/src";
import type { Problem } from "../env";
import { describeValue, fieldPath } from "../problems";
import type { LoadedModel } from "../scoring/model-cache";

/** A payment-form request that passed every check that needs no history. */
export interface PendingPayment {
  transactionId: string;
  segment: string | null;
  /** The record's account (the review store's accountRef). */
  accountRef: string;
  record: PaymentRecord;
  /** The `payment` object as received (for the content hash of repeats). */
  fields: Readonly<Record<string, unknown>>;
}

/** Where the server clock stands and how far a payment's time may lie from it (0: no check). */
export interface PaymentClock {
  nowMs: number;
  toleranceMs: number;
}

/** The parts of a score request the payment form reads. */
export interface PaymentRequest {
  transactionId: string;
  payment: Record<string, unknown>;
  segment?: string;
  accountRef?: string;
}

/**
 * Checks a payment-form request against the model's record spec and the clock.
 *
 * @param prefix field-path prefix (`""` or `payments[3].`).
 * @example
 * checkPaymentForm({ transactionId: "p1", payment: { createdAt: "…", accountRef: "a1", amount: 12 } }, model, "", clock)
 */
export function checkPaymentForm(
  request: PaymentRequest,
  model: LoadedModel,
  prefix: string,
  clock: PaymentClock,
): { ok: true; value: PendingPayment } | { ok: false; problems: Problem[] } {
  const at = (...path: string[]) => fieldPath(prefix, path);
  const spec = model.recordSpec;
  if (spec === null || spec.record === undefined) {
    return fail(at("payment"), `cannot be used with model ${model.version}: it reads ready features (no record spec); send features`);
  }
  const mapping = spec.record;
  const problems: Problem[] = [];
  if (request.accountRef !== undefined) {
    problems.push({ field: at("accountRef"), rule: `comes from the payment's ${JSON.stringify(mapping.account)} field in the payment form; leave it out` });
  }
  if (request.segment !== undefined && mapping.segment !== undefined) {
    problems.push({ field: at("segment"), rule: `comes from the payment's ${JSON.stringify(mapping.segment)} field in the payment form; leave it out` });
  }
  const accepted = recordColumns(spec);
  for (const key of Object.keys(request.payment)) {
    if (!accepted.includes(key)) problems.push({ field: at("payment", key), rule: `is not a field model ${model.version} reads; accepted: ${accepted.join(", ")}` });
  }
  const sentId = request.payment[mapping.id];
  if (sentId !== undefined && sentId !== request.transactionId) {
    problems.push({ field: at("payment", mapping.id), rule: `must equal transactionId when sent (it names the same payment). Actual: ${describeValue(sentId)}` });
  }
  if (problems.length > 0) return { ok: false, problems };
  let record: PaymentRecord;
  try {
    record = recordFromFields(spec, { ...request.payment, [mapping.id]: request.transactionId });
  } catch (error) {
    if (!(error instanceof RecordInputError)) throw error;
    return fail(at("payment", error.field), error.rule);
  }
  const distance = record.timeMs - clock.nowMs;
  if (clock.toleranceMs > 0 && Math.abs(distance) > clock.toleranceMs) {
    return fail(
      at("payment", mapping.time),
      `must lie within ${clock.toleranceMs / 1000} s of the server clock (PAYMENT_CLOCK_TOLERANCE_SECONDS). Actual: ${describeDistance(distance)} (server time ${new Date(clock.nowMs).toISOString()})`,
    );
  }
  const segment = record.segment ?? request.segment ?? null;
  return { ok: true, value: { transactionId: request.transactionId, segment, accountRef: record.account, record, fields: request.payment } };
}

/**
 * Distinct accounts the payment-form entries of a batch name (the record's account field, as sent):
 * each costs one call to its account's history. Entries in the features form, and payment objects
 * without a text account, name none (they are refused or scored without a history call).
 *
 * @example batchAccounts([{ payment: { accountRef: "a1" } }, { payment: { accountRef: "a1" } }], model) // 1
 */
export function batchAccounts(payments: readonly unknown[], model: LoadedModel): number {
  const field = model.recordSpec?.record?.account;
  if (field === undefined) return 0;
  const accounts = new Set<string>();
  for (const entry of payments) {
    const payment = typeof entry === "object" && entry !== null ? (entry as { payment?: unknown }).payment : undefined;
    if (typeof payment !== "object" || payment === null) continue;
    const account = (payment as Record<string, unknown>)[field];
    if (typeof account === "string") accounts.add(account);
  }
  return accounts.size;
}

/**
 * Turns the derived raw values into the model's raw vector, checking each against its transform's
 * domain (a derived value outside it is refused like a sent one, under `derived.<name>`).
 *
 * @param raw the derived values in the model's feature order.
 */
export function derivedVector(
  model: LoadedModel,
  raw: readonly number[],
  prefix: string,
): { ok: true; features: Record<string, number>; values: Float64Array } | { ok: false; problems: Problem[] } {
  const features: Record<string, number> = {};
  model.compiled.features.forEach((feature, i) => (features[feature.name] = raw[i]));
  const vector = rawVectorFromRecord(model.compiled, features);
  if ("errors" in vector) {
    return { ok: false, problems: vector.errors.map((e) => ({ field: fieldPath(prefix, ["derived", e.field.replace(/^features\./, "")]), rule: e.rule })) };
  }
  return { ok: true, features, values: vector.values };
}

function fail(field: string, rule: string): { ok: false; problems: Problem[] } {
  return { ok: false, problems: [{ field, rule }] };
}

/** "3 days 2 h earlier", "45 s later". */
function describeDistance(ms: number): string {
  const seconds = Math.abs(ms) / 1000;
  const side = ms < 0 ? "earlier" : "later";
  if (seconds < 120) return `${Math.round(seconds)} s ${side}`;
  if (seconds < 7200) return `${Math.round(seconds / 60)} min ${side}`;
  if (seconds < 172_800) return `${(seconds / 3600).toFixed(1)} h ${side}`;
  return `${(seconds / 86_400).toFixed(1)} days ${side}`;
}
