/**
 * Full batches, as `npm run replay` and a payment flow catching up send them: each asks only a few
 * idempotency objects (every object asked is one more subrequest and one more storage commit on
 * the batch's path, and once more when the answers are kept), and batches sent at once are all
 * answered in full. Before the bound, a batch of 100 asked about 55 of 128 objects twice over,
 * which made each batch take seconds under `wrangler dev` until the dev proxy lost connections.
 */
import { mkdtemp, readdir, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { fitShopModel, scoreBody, shopPayments } from "../fixtures";
import { publishModel, startWorker, type RunningWorker } from "../harness";

let dir: string;
let worker: RunningWorker;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-batches-"));
  worker = await startWorker({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0" }, persistDir: dir });
  await publishModel(worker, await fitShopModel({ version: "m20260302-load01" }));
});

afterAll(async () => {
  await worker?.dispose();
  await rm(dir, { recursive: true, force: true });
});

/** Idempotency objects that hold storage: Miniflare keeps one SQLite file per object (and its namespace's metadata.sqlite). */
async function idempotencyObjectsWithStorage(): Promise<number> {
  const root = join(dir, "do");
  const namespace = (await readdir(root).catch(() => [] as string[])).find((name) => name.endsWith("-IdempotencyObject"));
  if (!namespace) return 0;
  return (await readdir(join(root, namespace))).filter((name) => name.endsWith(".sqlite") && name !== "metadata.sqlite").length;
}

async function sendBatch(payments: unknown[]): Promise<{ status: number; text: string }> {
  const res = await worker.post("/v1/score/batch", { payments }, worker.tokens.flow);
  return { status: res.status, text: await res.text() };
}

function expectAllScored(answer: { status: number; text: string }, count: number): void {
  expect(answer.status, answer.text.slice(0, 300)).toBe(200);
  const body = JSON.parse(answer.text) as { results: { outcome: string }[] };
  expect(body.results.map((r) => r.outcome)).toEqual(new Array(count).fill("scored"));
}

describe("full batches and the idempotency store", () => {
  it("asks at most eight idempotency objects for a batch of 100 payments with different ids", async () => {
    const batch = shopPayments(100, 7).map((p, i) => scoreBody(`fanout-${i}`, p));
    expectAllScored(await sendBatch(batch), 100);
    // Claims are awaited before the answer, so every object asked already holds its ids.
    const touched = await idempotencyObjectsWithStorage();
    expect(touched).toBeGreaterThan(0);
    expect(touched).toBeLessThanOrEqual(8);
  });

  it("answers every one of eight batches of 100 sent at once with 200 and a scored result per payment", async () => {
    const payments = shopPayments(800, 11);
    const batches = Array.from({ length: 8 }, (_, b) => payments.slice(b * 100, b * 100 + 100).map((p, i) => scoreBody(`load-${b}-${i}`, p)));
    const answers = await Promise.all(batches.map(sendBatch));
    for (const answer of answers) expectAllScored(answer, 100);
    expect(worker.logs.filter((l) => l.message.includes("idempotency-")).map((l) => l.message)).toEqual([]);
  }, 120_000);
});
