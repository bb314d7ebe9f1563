/**
 * Derives a payment's raw feature values (before transforms) from the payment itself and the
 * account's earlier payments. "Earlier" means same account, time strictly before the payment's
 * time: the payment itself, payments at the same instant and later payments never leak in, also
 * when the payment arrives after later ones.
 */
import { entriesBefore, assertDerivable, isExpired, emptyHistory, type AccountHistory } from "./history";
import { localHourAtOffset, localHourInZone } from "./local-hour";
import { RecordInputError, type PaymentRecord } from "./record";
import type { Derivation, RecordSpec } from "./spec";

const EMPTY = emptyHistory();

function numberOf(record: PaymentRecord, column: string): number {
  const value = record.values[column];
  if (typeof value !== "number") throw new RecordInputError(column, `must be a finite number; got ${JSON.stringify(value)}`);
  return value;
}

/**
 * Raw feature values, in spec feature order, written into `out`. Uses only the account's payments
 * with time strictly before `record.timeMs`. Does not change `history`.
 * @param spec the parsed spec (with `record` when any derivation reads history)
 * @param history the account's history before this payment (see {@link recordPayment})
 * @param record the payment
 * @param out at least `spec.features.length` long
 * @throws {RecordInputError} for a zero denominator or a zero mean (naming the column and the
 *   feature), or a payment later than the lateness allows
 * @example deriveInto(spec, history, record, out) // out[0] = payments in the 24 h before record.timeMs
 */
export function deriveInto(spec: RecordSpec, history: AccountHistory, record: PaymentRecord, out: Float64Array): void {
  const t = record.timeMs;
  const held = isExpired(spec, history, t) ? EMPTY : history;
  assertDerivable(spec, held, t);
  const end = entriesBefore(held.entries, t);
  const features = spec.features;
  for (let f = 0; f < features.length; f++) out[f] = deriveOne(features[f].name, features[f].derivation, held, end, record);
}

/**
 * Raw feature values as an object by feature name (the edge's `derived`).
 * @example deriveByName(spec, history, record) // { amount: 42.5, paymentsLast24h: 2, … }
 */
export function deriveByName(spec: RecordSpec, history: AccountHistory, record: PaymentRecord): Record<string, number> {
  const out = new Float64Array(spec.features.length);
  deriveInto(spec, history, record, out);
  return Object.fromEntries(spec.features.map((f, i) => [f.name, out[i]]));
}

function deriveOne(feature: string, d: Derivation, history: AccountHistory, end: number, record: PaymentRecord): number {
  const t = record.timeMs;
  const entries = history.entries;
  switch (d.kind) {
    case "read":
      return numberOf(record, d.column);
    case "ratio": {
      const denominator = numberOf(record, d.denominator);
      if (denominator === 0) throw new RecordInputError(d.denominator, `must not be 0: it divides ${d.numerator} in feature "${feature}"`);
      return numberOf(record, d.numerator) / denominator;
    }
    case "since":
      return (t - numberOf(record, d.column)) / d.unitMs;
    case "count": {
      let n = 0;
      for (let i = end - 1; i >= 0 && entries[i].timeMs >= t - d.withinMs; i--) n++;
      return n;
    }
    case "sum": {
      let start = end;
      while (start > 0 && entries[start - 1].timeMs >= t - d.withinMs) start--;
      let total = 0;
      for (let i = start; i < end; i++) total += entries[i].values[d.column] as number;
      return total;
    }
    case "distinct": {
      const seen = new Set<string>();
      for (let i = end - 1; i >= 0 && entries[i].timeMs >= t - d.withinMs; i--) seen.add(String(entries[i].values[d.column]));
      return seen.size;
    }
    case "sincePrevious": {
      const previous = end > 0 ? entries[end - 1].timeMs : history.foldedLatestMs;
      return previous === null ? d.none : (t - previous) / d.unitMs;
    }
    case "vsMean": {
      const count = history.foldedCount + end;
      if (count === 0) return d.none;
      let total = history.foldedSums[d.column] ?? 0;
      for (let i = 0; i < end; i++) total += entries[i].values[d.column] as number;
      if (total === 0) throw new RecordInputError(d.column, `has a mean of 0 over the account's earlier payments, so feature "${feature}" (value ÷ mean) is undefined`);
      return numberOf(record, d.column) / (total / count);
    }
    case "hourOfDay":
      return "timeZone" in d ? localHourInZone(t, d.timeZone) : localHourAtOffset(t, d.utcOffsetMinutes);
  }
}
