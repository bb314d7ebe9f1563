/**
 * Scoring in process (./in-process.ts): answers equal the model core's own Scorer, batches answer each
 * payment on its own, repeats are idempotent (409 on a conflicting repeat), flags and audit draws
 * reach the review store once, and a shadow model is recorded without touching the answer.
 */
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { compileModel, parseArtifact, Scorer, type ModelArtifact } from "../../shared-model/src";
import { auditPosition } from "../src/scoring/audit-sample";
import { countRows, eventually, publishModel, queueDelivered } from "./harness";
import { startApp, type InProcessWorker } from "./in-process";
import { fitShopModel, scoreBody, shopPayments, UNUSUAL_PAYMENT, SHOP_FEATURES } from "./fixtures";

let worker: InProcessWorker;
let artifact: ModelArtifact;
let scorer: Scorer;

beforeAll(async () => {
  artifact = await fitShopModel({ version: "mshop-live" });
  scorer = new Scorer(compileModel(await parseArtifact(artifact)));
  worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0.05" } });
  await publishModel(worker, artifact);
});
afterAll(async () => {
  await worker?.dispose();
});

/** Relative closeness that prints both values on failure. */
function expectClose(actual: number, expected: number, what: string): void {
  const scale = Math.max(1, Math.abs(expected));
  expect(Math.abs(actual - expected) / scale, `${what}: worker ${actual} vs core ${expected}`).toBeLessThan(1e-12);
}

function rawOf(features: Record<string, number>): number[] {
  return SHOP_FEATURES.map((f) => features[f.name]);
}

describe("POST /v1/score", () => {
  test("answers exactly what the model core's Scorer computes for typical and unusual payments", async () => {
    const payments = [
      ...shopPayments(20, 401).map((p, i) => ({ id: `happy-${i}`, features: p.features, segment: p.channel })),
      { id: "happy-unusual", features: UNUSUAL_PAYMENT, segment: "web" },
      { id: "happy-phone", features: shopPayments(1, 9)[0].features, segment: "phone" },
      { id: "happy-unknown-segment", features: shopPayments(1, 10)[0].features, segment: "kiosk" },
    ];
    for (const p of payments) {
      const response = await worker.post("/v1/score", { transactionId: p.id, features: p.features, segment: p.segment }, worker.tokens.flow);
      expect(response.status).toBe(200);
      const answer = (await response.json()) as Record<string, any>;
      const expected = scorer.score(rawOf(p.features), p.segment);
      const reasons = scorer.explain(rawOf(p.features), p.segment, 3);
      expect(answer.transactionId).toBe(p.id);
      expect(answer.modelVersion).toBe("mshop-live");
      expect(answer.segment).toBe(expected.segment);
      expect(answer.decision).toBe(expected.flagged ? "review" : "pass");
      expectClose(answer.mahalanobisSq, expected.mahalanobisSq, "mahalanobisSq");
      expectClose(answer.logDensity, expected.logDensity, "logDensity");
      expectClose(answer.tailProbability, expected.tailProbability, "tailProbability");
      expectClose(answer.log10TailProbability, expected.log10TailProbability, "log10TailProbability");
      expect(answer.cutoff.mahalanobisSq).toBe(artifact.cutoff.mahalanobisSq);
      expect(answer.cutoff.tailProbability).toBe(artifact.cutoff.tailProbability);
      expect(answer.cutoff.logDensity).toBe(artifact.cutoff.logDensity[expected.segment]);
      expect(answer.reasons.map((r: { feature: string }) => r.feature)).toEqual(reasons.map((r) => r.feature));
      answer.reasons.forEach((r: any, i: number) => {
        expectClose(r.standardizedResidual, reasons[i].standardizedResidual, `reason ${r.feature}`);
        expectClose(r.expected.low, reasons[i].expected.low, `reason ${r.feature} low`);
        expectClose(r.expected.high, reasons[i].expected.high, `reason ${r.feature} high`);
        expect(r.actual).toBe(reasons[i].actual);
      });
    }
  });

  test("sends an unusual payment to review, scored by its segment, with the pooled model for small or unknown segments", async () => {
    const unusual = await worker.post("/v1/score", { transactionId: "seg-unusual", features: UNUSUAL_PAYMENT, segment: "web" }, worker.tokens.flow);
    const body = (await unusual.json()) as Record<string, any>;
    expect(body.decision).toBe("review");
    expect(body.segment).toBe("web");
    expect(body.auditSample).toBe(false);
    const phone = await worker.post("/v1/score", { transactionId: "seg-phone", features: UNUSUAL_PAYMENT, segment: "phone" }, worker.tokens.flow);
    expect(((await phone.json()) as { segment: string }).segment).toBe("*");
    const none = await worker.post("/v1/score", { transactionId: "seg-none", features: UNUSUAL_PAYMENT }, worker.tokens.flow);
    expect(((await none.json()) as { segment: string }).segment).toBe("*");
  });

  test("returns the identical answer to a repeat and stores one review row", async () => {
    const body = { transactionId: "repeat-1", features: UNUSUAL_PAYMENT, segment: "app", accountRef: "acct-77f0" };
    const first = await worker.post("/v1/score", body, worker.tokens.flow);
    const second = await worker.post("/v1/score", { ...body, features: { ...UNUSUAL_PAYMENT } }, worker.tokens.flow2);
    expect(first.status).toBe(200);
    expect(second.status).toBe(200);
    expect(await second.text()).toBe(await first.text());
    const db = await worker.db();
    await eventually(async () => ((await countRows(db, "review_items", "transaction_id = ?1", "repeat-1")) === 1 ? true : undefined), 15_000);
    const row = await db.prepare("SELECT * FROM review_items WHERE transaction_id = ?1").bind("repeat-1").first<Record<string, unknown>>();
    expect(row).toMatchObject({ model_version: "mshop-live", segment: "app", account_ref: "acct-77f0", selection: "flagged", inclusion_probability: 1 });
    expect(JSON.parse(String(row!.features_json))).toEqual(UNUSUAL_PAYMENT);
    expect(JSON.parse(String(row!.reasons_json)).length).toBe(3);
    expect(Number.isNaN(Date.parse(String(row!.scored_at)))).toBe(false);
    expect(Number.isNaN(Date.parse(String(row!.received_at)))).toBe(false);
  });

  test("answers 409 naming transactionId when a repeat carries different features, and stores nothing for it", async () => {
    const body = { transactionId: "repeat-2", features: UNUSUAL_PAYMENT, segment: "web" };
    expect((await worker.post("/v1/score", body, worker.tokens.flow)).status).toBe(200);
    const conflicting = await worker.post("/v1/score", { ...body, features: { ...UNUSUAL_PAYMENT, amount: 2451 } }, worker.tokens.flow);
    expect(conflicting.status).toBe(409);
    const error = (await conflicting.json()) as { error: string; problems: { field: string; rule: string }[] };
    expect(error.error).toBe("conflict");
    expect(error.problems[0].field).toBe("transactionId");
    expect(error.problems[0].rule).toContain("repeat-2");
    const otherSegment = await worker.post("/v1/score", { ...body, segment: "app" }, worker.tokens.flow);
    expect(otherSegment.status).toBe(409);
    const db = await worker.db();
    await eventually(async () => ((await countRows(db, "review_items", "transaction_id = ?1", "repeat-2")) === 1 ? true : undefined), 15_000);
    const row = await db.prepare("SELECT features_json, segment FROM review_items WHERE transaction_id = ?1").bind("repeat-2").first<Record<string, string>>();
    expect(JSON.parse(row!.features_json).amount).toBe(2450);
    expect(row!.segment).toBe("web");
  });
});

describe("POST /v1/score/batch", () => {
  test("scores each payment on its own: a bad item is refused without sinking the others", async () => {
    const good = shopPayments(3, 77);
    const response = await worker.post(
      "/v1/score/batch",
      {
        payments: [
          scoreBody("batch-a", good[0]),
          { transactionId: "batch-b", features: { ...good[1].features, amount: "12" } },
          scoreBody("batch-c", good[2]),
          { transactionId: "batch-d", features: UNUSUAL_PAYMENT, segment: "web" },
          { transactionId: "batch-d", features: UNUSUAL_PAYMENT, segment: "web" },
          { transactionId: "batch-d", features: { ...UNUSUAL_PAYMENT, items: 2 }, segment: "web" },
        ],
      },
      worker.tokens.flow,
    );
    expect(response.status).toBe(200);
    const body = (await response.json()) as { modelVersion: string; results: any[]; counts: Record<string, number> };
    expect(body.modelVersion).toBe("mshop-live");
    expect(body.results.map((r) => [r.index, r.outcome])).toEqual([
      [0, "scored"],
      [1, "refused"],
      [2, "scored"],
      [3, "scored"],
      [4, "scored"],
      [5, "refused"],
    ]);
    expect(body.results[1]).toMatchObject({ status: 400, error: "invalid-request" });
    expect(body.results[1].problems).toEqual([{ field: "payments[1].features.amount", rule: 'must be a number. Actual: string "12"' }]);
    expect(body.results[4].result).toEqual(body.results[3].result);
    expect(body.results[5]).toMatchObject({ status: 409, error: "conflict" });
    expect(body.results[5].problems[0].field).toBe("payments[5].transactionId");
    expect(body.counts).toEqual({ scored: 4, refused: 2, review: 2, auditSample: body.counts.auditSample });
    const single = await worker.post("/v1/score", scoreBody("batch-a", good[0]), worker.tokens.flow);
    expect(await single.json()).toEqual(body.results[0].result);
    const db = await worker.db();
    await eventually(async () => ((await countRows(db, "review_items", "transaction_id = ?1", "batch-d")) === 1 ? true : undefined), 15_000);
    expect(await countRows(db, "review_items", "transaction_id = ?1", "batch-b")).toBe(0);
  });

  test("refuses a batch over MAX_BATCH, or an envelope with unknown keys, as a whole", async () => {
    const many = shopPayments(101, 5).map((p, i) => scoreBody(`over-${i}`, p));
    const over = await worker.post("/v1/score/batch", { payments: many }, worker.tokens.flow);
    expect(over.status).toBe(400);
    expect(await over.json()).toEqual({
      error: "invalid-request",
      problems: [{ field: "payments", rule: "must hold 1 to 100 payments (MAX_BATCH). Actual: 101" }],
    });
    const empty = await worker.post("/v1/score/batch", { payments: [] }, worker.tokens.flow);
    expect(empty.status).toBe(400);
    const extra = await worker.post("/v1/score/batch", { payments: [scoreBody("x-1", many[0] as never)], dryRun: true }, worker.tokens.flow);
    expect(extra.status).toBe(400);
    expect(((await extra.json()) as { problems: { field: string }[] }).problems[0].field).toBe("dryRun");
    const db = await worker.db();
    expect(await countRows(db, "review_items", "transaction_id LIKE 'over-%'")).toBe(0);
  });
});

describe("audit sample", () => {
  test("draws exactly the passing payments whose hash position is below the rate, and stores the rate as inclusion probability", async () => {
    const payments = shopPayments(1500, 2024);
    let expectedAudit = 0;
    const auditIds: string[] = [];
    for (let start = 0; start < payments.length; start += 100) {
      const chunk = payments.slice(start, start + 100).map((p, i) => scoreBody(`aud-${start + i}`, p));
      const response = await worker.post("/v1/score/batch", { payments: chunk }, worker.tokens.flow);
      const body = (await response.json()) as { results: { outcome: string; result: { transactionId: string; decision: string; auditSample: boolean } }[] };
      for (const r of body.results) {
        expect(r.outcome).toBe("scored");
        const position = await auditPosition(r.result.transactionId);
        const shouldAudit = r.result.decision === "pass" && position < 0.05;
        expect(r.result.auditSample, r.result.transactionId).toBe(shouldAudit);
        if (shouldAudit) {
          expectedAudit++;
          auditIds.push(r.result.transactionId);
        }
      }
    }
    expect(expectedAudit).toBeGreaterThan(30);
    const db = await worker.db();
    await eventually(async () => ((await countRows(db, "review_items", "transaction_id LIKE 'aud-%' AND selection = 'audit'")) === expectedAudit ? true : undefined), 20_000);
    expect(await countRows(db, "review_items", "transaction_id LIKE 'aud-%' AND selection = 'audit' AND inclusion_probability = 0.05")).toBe(expectedAudit);
    const { results } = await db.prepare("SELECT transaction_id FROM review_items WHERE transaction_id LIKE 'aud-%' AND selection = 'audit'").all<{ transaction_id: string }>();
    expect(results.map((r) => r.transaction_id).sort()).toEqual([...auditIds].sort());
  });
});

describe("shadow model", () => {
  test("records live and shadow scores side by side while the answer stays the live model's", async () => {
    const shadowArtifact = await fitShopModel({ version: "mshop-shadow", seed: 12, cutoffRate: 0.05, segmentBy: null });
    await publishModel(worker, shadowArtifact, false);
    const set = await worker.fetch("/v1/models/shadow", {
      method: "PUT",
      headers: { "content-type": "application/json" },
      body: JSON.stringify({ version: "mshop-shadow" }),
      token: worker.tokens.admin,
    });
    expect(set.status).toBe(200);
    const payment = shopPayments(1, 808)[0];
    const response = await worker.post("/v1/score", scoreBody("shadow-1", payment), worker.tokens.flow);
    const answer = (await response.json()) as { modelVersion: string; mahalanobisSq: number };
    expect(answer.modelVersion).toBe("mshop-live");
    expectClose(answer.mahalanobisSq, scorer.score(rawOf(payment.features), payment.channel).mahalanobisSq, "live d²");
    const shadowScorer = new Scorer(compileModel(await parseArtifact(shadowArtifact)));
    const expectedShadow = shadowScorer.score(rawOf(payment.features), payment.channel);
    const db = await worker.db();
    const row = await eventually(async () => (await db.prepare("SELECT * FROM shadow_scores WHERE transaction_id = 'shadow-1'").first<Record<string, any>>()) ?? undefined, 15_000);
    expect(row).toMatchObject({ live_version: "mshop-live", shadow_version: "mshop-shadow", shadow_segment: "*", shadow_flagged: expectedShadow.flagged ? 1 : 0 });
    expectClose(row.shadow_mahalanobis_sq, expectedShadow.mahalanobisSq, "shadow d²");
    const cleared = await worker.fetch("/v1/models/shadow", {
      method: "PUT",
      headers: { "content-type": "application/json" },
      body: JSON.stringify({ version: null }),
      token: worker.tokens.admin,
    });
    expect(cleared.status).toBe(200);
    expect((await worker.post("/v1/score", scoreBody("shadow-2", payment), worker.tokens.flow)).status).toBe(200);
    // Whatever shadow-2 handed to waitUntil has been sent once settled; the marker comes after it.
    await worker.settle();
    await queueDelivered(worker, "shadow-marker");
    expect(await countRows(db, "shadow_scores", "transaction_id = 'shadow-2'")).toBe(0);
  });
});
