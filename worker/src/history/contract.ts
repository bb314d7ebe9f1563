/** What the account-history Durable Object answers (plain data: it crosses the RPC boundary). */

/** One payment's derivation: its raw features in the model's feature order, or the field it broke. */
export type HistoryResult =
  | {
      ok: true;
      /** Raw feature values (before transforms), in the spec's (= the model's) feature order. */
      raw: number[];
      /** True when the payment id was already held: derived again, not recorded twice. */
      repeat: boolean;
    }
  | { ok: false; field: string; rule: string };

/** What one account holds. */
export interface HistoryFootprint {
  /** Payments kept in full (inside the longest window plus the lateness). */
  keptPayments: number;
  /** Older payments folded into running totals. */
  foldedPayments: number;
  /** Bytes of the stored history JSON. */
  historyBytes: number;
  /** Bytes of the object's whole SQLite database (pages, schema, alarm). */
  databaseBytes: number;
  /** Server time (ms) of the last recorded payment; null when nothing is held. */
  lastActivityMs: number | null;
  /** When the expiry alarm will look at this account next (ms); null when none is set. */
  alarmAtMs: number | null;
}
