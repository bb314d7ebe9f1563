/**
 * The durable hand-off on the real worker with the real local queue and D1: when D1 writes fail,
 * messages are retried, move to the dead-letter queue after five retries, are retried there with
 * back-off, and once D1 is back every flagged payment is in the review store exactly once.
 * Also: redelivered messages never make a second row, and a malformed message neither blocks its
 * batch nor vanishes silently.
 */
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import type { ReviewMessage } from "../../src/storage/messages";
import { countRows, deadLetterBacklog, eventually, publishModel, queueDelivered, startWorker, type RunningWorker } from "../harness";
import { fitShopModel, scoreBody, shopPayments, UNUSUAL_PAYMENT } from "../fixtures";

let worker: RunningWorker;

beforeAll(async () => {
  worker = await startWorker({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0" } });
  await publishModel(worker, await fitShopModel({ version: "mhand-1" }));
});
afterAll(async () => {
  await worker?.dispose();
});

/** Simulator and worker log text so far. */
function logText(): string {
  return worker.logs.map((l) => l.message).join("\n");
}

function occurrences(text: string, needle: string): number {
  return text.split(needle).length - 1;
}

/** Scores a batch and returns the ids the worker sent to review. */
async function scoreBatch(prefix: string, unusual: number, typical: number, seed: number): Promise<string[]> {
  const payments = [
    ...Array.from({ length: unusual }, (_, i) => ({
      transactionId: `${prefix}-u${i}`,
      features: { ...UNUSUAL_PAYMENT, amount: 1800 + 37 * i },
      segment: i % 2 === 0 ? "web" : "app",
    })),
    ...shopPayments(typical, seed).map((p, i) => scoreBody(`${prefix}-t${i}`, p)),
  ];
  const response = await worker.post("/v1/score/batch", { payments }, worker.tokens.flow);
  expect(response.status).toBe(200);
  const body = (await response.json()) as { results: { outcome: string; result: { transactionId: string; decision: string } }[] };
  expect(body.results.every((r) => r.outcome === "scored")).toBe(true);
  return body.results.filter((r) => r.result.decision === "review").map((r) => r.result.transactionId);
}

describe("D1 failure", () => {
  test("loses no flagged payment and duplicates none when review-store writes fail for a while", { timeout: 150_000 }, async () => {
    const db = await worker.db();
    await db.exec("ALTER TABLE review_items RENAME TO review_items_away");
    let renamedBack = false;
    try {
      const firstWave = await scoreBatch("dl-a", 8, 30, 31);
      expect(firstWave.length).toBeGreaterThanOrEqual(8);
      // Five failed retries later the simulator moves each message to the dead-letter queue.
      await eventually(async () => (occurrences(logText(), 'to dead letter queue "isodense-flags-dead"') >= firstWave.length ? true : undefined), 60_000);
      const secondWave = await scoreBatch("dl-b", 6, 20, 32);
      // The dead-letter consumer has tried and failed at least once.
      await eventually(async () => (/review-store-write-failed[^\n]*isodense-flags-dead/.test(logText()) ? true : undefined), 30_000);
      expect(await countRows(db, "review_items_away")).toBe(0);
      await db.exec("ALTER TABLE review_items_away RENAME TO review_items");
      renamedBack = true;
      const expected = [...firstWave, ...secondWave].sort();
      await eventually(async () => ((await countRows(db, "review_items", "transaction_id LIKE 'dl-%'")) >= expected.length ? true : undefined), 90_000, 500);
      // Count duplicates only once no copy of any message can still land: the dead-letter queue
      // owes no delivery (its retries wait up to 2^attempts s), and the main queue has delivered
      // everything sent to it before a marker.
      await queueDelivered(worker, "handoff-drained-marker");
      await eventually(async () => (deadLetterBacklog(worker.logs, "isodense-flags-dead") === 0 ? true : undefined), 60_000, 500);
      const { results } = await db
        .prepare("SELECT transaction_id, COUNT(*) AS n FROM review_items WHERE transaction_id LIKE 'dl-%' GROUP BY transaction_id ORDER BY transaction_id")
        .all<{ transaction_id: string; n: number }>();
      expect(results.map((r) => r.transaction_id)).toEqual(expected);
      expect(results.every((r) => r.n === 1)).toBe(true);
      expect(await countRows(db, "review_items", "transaction_id LIKE 'dl-%' AND selection = 'flagged' AND model_version = 'mhand-1'")).toBe(expected.length);
    } finally {
      if (!renamedBack) await db.exec("ALTER TABLE review_items_away RENAME TO review_items");
    }
  });
});

/** A review message as the request path would send it (invented payment). */
function reviewMessage(transactionId: string): ReviewMessage {
  return {
    kind: "review",
    transactionId,
    modelVersion: "mhand-1",
    segment: "web",
    accountRef: null,
    features: { ...UNUSUAL_PAYMENT },
    logDensity: -120.5,
    mahalanobisSq: 240.25,
    tailProbability: 1e-45,
    cutoffMahalanobisSq: 14.3,
    reasons: [],
    selection: "flagged",
    inclusionProbability: 1,
    scoredAt: "2026-03-02T10:00:00.000Z",
  };
}

describe("queue consumer", () => {
  test("writes a message delivered several times as one row", async () => {
    const queue = await worker.mf.getQueueProducer<ReviewMessage>("FLAGS");
    await queue.send(reviewMessage("dup-1"), { contentType: "json" });
    await queue.sendBatch([
      { body: reviewMessage("dup-1"), contentType: "json" },
      { body: reviewMessage("dup-1"), contentType: "json" },
    ]);
    await queue.send(reviewMessage("dup-1"), { contentType: "json" });
    const db = await worker.db();
    // A marker sent last: the local queue delivers in order, so once it is stored every copy of dup-1 has been.
    await queue.send(reviewMessage("dup-marker"), { contentType: "json" });
    await eventually(async () => ((await countRows(db, "review_items", "transaction_id = 'dup-marker'")) === 1 ? true : undefined), 15_000);
    expect(await countRows(db, "review_items", "transaction_id = 'dup-1'")).toBe(1);
  });

  test("writes a flag whose reasons have no finite expected range (sent as null) instead of refusing it", async () => {
    const queue = await worker.mf.getQueueProducer<ReviewMessage>("FLAGS");
    const message = reviewMessage("unbounded-range");
    message.reasons = [{ feature: "shippingShare", actual: 0.5991, expected: { center: null, low: 0.47, high: null }, standardizedResidual: -3.25 }];
    await queue.send(message, { contentType: "json" });
    const db = await worker.db();
    const row = await eventually(
      async () => (await db.prepare("SELECT reasons_json FROM review_items WHERE transaction_id = 'unbounded-range'").first<{ reasons_json: string }>()) ?? undefined,
      15_000,
    );
    expect(JSON.parse(row.reasons_json)).toEqual(message.reasons);
  });

  test("writes the good messages of a batch that also holds a malformed one, and logs the malformed one in full from the dead-letter queue", { timeout: 60_000 }, async () => {
    const queue = await worker.mf.getQueueProducer<unknown>("FLAGS");
    await queue.sendBatch([
      { body: { kind: "review", transactionId: 12345, note: "poison-7f3e" }, contentType: "json" },
      { body: reviewMessage("beside-poison"), contentType: "json" },
    ]);
    const db = await worker.db();
    await eventually(async () => ((await countRows(db, "review_items", "transaction_id = 'beside-poison'")) === 1 ? true : undefined), 15_000);
    await eventually(async () => (/handoff-message-unwritable[^\n]*poison-7f3e/.test(logText()) ? true : undefined), 40_000);
  });
});
