/**
 * Invented payment records of a fictional shop's accounts, and a model fitted to the features the
 * shared model derives from them, with the record spec carried in the artifact. The derivation
 * here is the offline one (`deriveInto` over each account's history in time order): the worker's
 * `derived` must agree with it.
 */
import {
  deriveInto,
  emptyHistory,
  fitModel,
  parseRecordSpec,
  recordFromFields,
  recordPayment,
  type AccountHistory,
  type FitRow,
  type ModelArtifact,
  type RecordSpec,
} from "../../shared-model/src";
import { mulberry32 } from "../../shared-model/src/seeded-stream";

/** The test spec: a read column, two history windows, a mean ratio, an account age and the hour. */
export const SHOP_RECORD_SPEC_JSON = {
  record: { id: "paymentId", time: "createdAt", account: "accountRef", segment: "channel", lateness: "1h", retention: "30d" },
  features: [
    { name: "amount", transform: "log" },
    { name: "paymentsLast24h", transform: "log1p", count: { within: "24h" } },
    { name: "hoursSincePrevious", transform: "log1p", sincePrevious: { unit: "hours", none: 720 } },
    { name: "amountVsAccountAverage", transform: "log", vsMean: { column: "amount", none: 1 } },
    { name: "accountAgeDays", transform: "log1p", since: { column: "accountCreatedAt", unit: "days" } },
    { name: "hourOfDay", transform: "cyclic-hour", hourOfDay: { utcOffset: "+00:00" } },
  ],
};

/** The parsed test spec. */
export const SHOP_RECORD_SPEC: RecordSpec = parseRecordSpec(SHOP_RECORD_SPEC_JSON);

/** One invented ledger row: the record's fields as a client would send them in `payment`. */
export type LedgerRow = Record<string, string | number>;

/**
 * Invented records in time order: `accounts` accounts, each paying a few times over `days` days
 * starting at `startMs`, with bursts now and then (several payments within hours).
 */
export function shopLedger(options: { accounts: number; payments: number; startMs: number; days: number; seed: number }): LedgerRow[] {
  const rng = mulberry32(options.seed);
  const created = Array.from({ length: options.accounts }, () => options.startMs - Math.round(86_400_000 * Math.exp(4 + rng.normal())));
  const rows: LedgerRow[] = [];
  let t = options.startMs;
  const step = (options.days * 86_400_000) / options.payments;
  for (let i = 0; i < options.payments; i++) {
    t += Math.round(step * -Math.log(1 - rng.uniform() * 0.999));
    const account = Math.floor(rng.uniform() * rng.uniform() * options.accounts);
    const u = rng.uniform();
    rows.push({
      paymentId: `pay-${options.seed}-${String(i).padStart(5, "0")}`,
      createdAt: new Date(t).toISOString(),
      accountRef: `acct-${String(account).padStart(4, "0")}`,
      channel: u < 0.6 ? "web" : u < 0.95 ? "app" : "phone",
      amount: Math.round(100 * Math.exp(3.6 + 0.6 * rng.normal())) / 100,
      accountCreatedAt: new Date(created[account]).toISOString(),
    });
  }
  return rows;
}

/**
 * Derives every row's raw features offline, in the rows' order, with one history per account.
 *
 * @returns raw values in spec feature order, one array per row.
 */
export function deriveOffline(spec: RecordSpec, rows: readonly LedgerRow[]): Float64Array[] {
  const histories = new Map<string, AccountHistory>();
  return rows.map((row) => {
    const record = recordFromFields(spec, row);
    const history = histories.get(record.account) ?? emptyHistory();
    histories.set(record.account, history);
    const out = new Float64Array(spec.features.length);
    deriveInto(spec, history, record, out);
    recordPayment(spec, history, record);
    return out;
  });
}

/** Fits a model to the derived features of `rows`, carrying the record spec (the shop's unless another is given). */
export async function fitRecordModel(rows: readonly LedgerRow[], version: string, spec: RecordSpec = SHOP_RECORD_SPEC): Promise<ModelArtifact> {
  const derived = deriveOffline(spec, rows);
  const fitRows: FitRow[] = derived.map((values, i) => ({ values, segment: String(rows[i].channel) }));
  const { artifact } = await fitModel(
    {
      async *pass() {
        yield* fitRows;
      },
    },
    {
      features: spec.features,
      recordSpec: spec,
      shape: "full",
      estimator: "classical",
      segmentBy: "channel",
      cutoffRate: 0.02,
      seed: 5,
      createdAt: "2026-03-02T09:00:00.000Z",
      source: "worker tests (invented payment records)",
      version,
    },
  );
  return artifact;
}
