/**
 * Decides the demo queue from the demo ledger's own labels, through the review API as an analyst
 * would (claim, then decide). For the invented demo only: it stands in for a desk of analysts so
 * the loop (decisions → labels → tuning → refit) can run end to end on one machine.
 */
import type { ActionResult, QueuePage } from "../worker/src/contract";

async function call<T>(base: string, path: string, token: string, body?: unknown): Promise<T> {
  const send = () =>
    fetch(`${base}${path}`, {
      method: body === undefined ? "GET" : "POST",
      headers: { authorization: `Bearer ${token}`, ...(body === undefined ? {} : { "content-type": "application/json" }) },
      body: body === undefined ? undefined : JSON.stringify(body),
    });
  let res: Response;
  try {
    res = await send();
  } catch {
    // A pooled keep-alive connection the local server had already closed: the request never got
    // through, so sending it once more on a fresh connection is safe.
    res = await send();
  }
  const text = await res.text();
  if (!res.ok) throw new Error(`${path} answered ${res.status}: ${text.slice(0, 400)}`);
  return JSON.parse(text) as T;
}

/**
 * Claims and decides every open item whose payment the ledger labels; returns how many of each.
 * @param labelOf the ledger's label by payment id ("fraud" / "legitimate"), or undefined to skip it
 * @param share decide only this share of the open items (default all), oldest ids first
 */
export async function decideFromLedger(
  base: string,
  token: string,
  labelOf: (paymentId: string) => "fraud" | "legitimate" | undefined,
  share = 1,
): Promise<{ fraud: number; legitimate: number }> {
  const open: { id: number; transactionId: string }[] = [];
  let cursor: string | null = null;
  do {
    const query: string = `/v1/review/items?state=open&sort=age&limit=100${cursor ? `&cursor=${encodeURIComponent(cursor)}` : ""}`;
    const page: QueuePage = await call<QueuePage>(base, query, token);
    open.push(...page.items.map((i) => ({ id: i.id, transactionId: i.transactionId })));
    cursor = page.nextCursor;
  } while (cursor);
  const chosen = open.slice(0, Math.round(open.length * share));
  const decided = { fraud: 0, legitimate: 0 };
  for (const item of chosen) {
    const outcome = labelOf(item.transactionId);
    if (!outcome) continue;
    await call<ActionResult>(base, `/v1/review/items/${item.id}/claim`, token, {});
    await call<ActionResult>(base, `/v1/review/items/${item.id}/decision`, token, { outcome });
    decided[outcome]++;
  }
  return decided;
}
