/**
 * The worker's side of the account-history Durable Object: one call per account per request
 * (payments of one account in a batch go together, in the order received), all accounts in
 * parallel, each bounded by HISTORY_TIMEOUT_MS. A call that fails or runs out of time makes its
 * payments `unavailable`; the route answers those 503 `retryable` (docs/worker.md, fail-open advice).
 */
import type { PaymentRecord, RecordSpec } from "../../../shared-model/src";
import type { AccountHistoryObject } from "./account-history-object";
import type { HistoryResult } from "./contract";

/** A payment whose history could not be read or written in time. */
export type HistoryOutcome = HistoryResult | { ok: false; unavailable: true };

/**
 * Derives and records each payment at its account's Durable Object.
 *
 * @param specKey the model version (the object keeps one spec per key).
 * @param timeoutMs longest wait for one account's answer.
 * @returns one outcome per record, in order.
 * @example
 * const [outcome] = await deriveAtAccounts(env.ACCOUNT_HISTORY, model.version, spec, [record], 200);
 */
export async function deriveAtAccounts(
  namespace: DurableObjectNamespace<AccountHistoryObject>,
  specKey: string,
  spec: RecordSpec,
  records: readonly PaymentRecord[],
  timeoutMs: number,
): Promise<HistoryOutcome[]> {
  const byAccount = new Map<string, number[]>();
  records.forEach((record, i) => {
    const list = byAccount.get(record.account);
    if (list) list.push(i);
    else byAccount.set(record.account, [i]);
  });
  const outcomes: HistoryOutcome[] = new Array(records.length);
  await Promise.all(
    [...byAccount].map(async ([account, indexes]) => {
      const stub = namespace.get(namespace.idFromName(account));
      try {
        const results = await withinTime(
          stub.deriveAndRecord(
            specKey,
            spec,
            indexes.map((i) => records[i]),
          ),
          timeoutMs,
        );
        indexes.forEach((recordIndex, k) => (outcomes[recordIndex] = results[k]));
      } catch (error) {
        console.error(JSON.stringify({ event: "history-unavailable", payments: indexes.length, error: String(error) }));
        for (const i of indexes) outcomes[i] = { ok: false, unavailable: true };
      }
    }),
  );
  return outcomes;
}

/** Why a call gave up waiting. */
export class HistoryTimeoutError extends Error {
  constructor(readonly timeoutMs: number) {
    super(`the account history did not answer within ${timeoutMs} ms`);
    this.name = "HistoryTimeoutError";
  }
}

/**
 * Resolves as `work` does, or rejects with {@link HistoryTimeoutError} after `timeoutMs`.
 *
 * @example
 * await withinTime(stub.erase(), 200);
 */
export async function withinTime<T>(work: Promise<T>, timeoutMs: number): Promise<T> {
  let timer: ReturnType<typeof setTimeout> | undefined;
  const expiry = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new HistoryTimeoutError(timeoutMs)), timeoutMs);
  });
  try {
    return await Promise.race([work, expiry]);
  } finally {
    if (timer !== undefined) clearTimeout(timer);
  }
}
