/**
 * Everything the worker stores, counted: rows of every D1 table (found from sqlite_master, so a
 * table added by a later migration is counted too) and the keys in KV. The fuzz suites compare
 * these before and after, to show that a refused request leaves nothing behind.
 */
import type { RunningWorker } from "./harness";

/**
 * Row count per D1 table and `kv:keys`, the number of KV keys.
 *
 * @example
 * const before = await storedCounts(worker); // { "review_items": 0, …, "kv:keys": 2 }
 */
export async function storedCounts(worker: RunningWorker): Promise<Record<string, number>> {
  const db = await worker.db();
  const { results } = await db
    .prepare("SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%' AND name NOT LIKE '_cf_%' AND name NOT LIKE 'd1_%' ORDER BY name")
    .all<{ name: string }>();
  const counts: Record<string, number> = {};
  for (const { name } of results) {
    const row = await db.prepare(`SELECT COUNT(*) AS n FROM "${name.replace(/"/g, '""')}"`).first<{ n: number }>();
    counts[name] = Number(row?.n ?? 0);
  }
  const kv = (await worker.kv()) as unknown as { list(options?: { cursor?: string }): Promise<{ keys: unknown[]; list_complete: boolean; cursor?: string }> };
  let keys = 0;
  let cursor: string | undefined;
  for (;;) {
    const page = await kv.list(cursor ? { cursor } : undefined);
    keys += page.keys.length;
    if (page.list_complete || !page.cursor) break;
    cursor = page.cursor;
  }
  counts["kv:keys"] = keys;
  return counts;
}
