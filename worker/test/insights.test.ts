/**
 * The loop's service half in process (./in-process.ts: the app with real local KV, D1, Queues
 * and Durable Objects): traffic counts flushed through the queue and upserted once however often a flush is
 * delivered; the labelled operating table and its estimates from decisions made through the
 * review API; the shadow comparison; the score histogram; publishing a retuned cutoff and rolling
 * it back; role checks and bad input on every new route. Payments are invented (fixtures.ts).
 */
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { bucketIndex, parseArtifact, type ModelArtifact } from "../../shared-model/src";
import type { CountsMessage } from "../src/insights/counts-message";
import { dayBefore } from "../src/insights/traffic-queries";
import { fitShopModel, scoreBody, shopPayments, UNUSUAL_PAYMENT } from "./fixtures";
import { countRows, eventually, type D1Like, type RunningWorker } from "./harness";
import { startApp } from "./in-process";

let worker: RunningWorker;
let db: D1Like;
let live: ModelArtifact;
let shadowModel: ModelArtifact;

interface Answer {
  transactionId: string;
  decision: "review" | "pass";
  mahalanobisSq: number;
  auditSample: boolean;
  segment: string;
  modelVersion: string;
}
interface Refusal {
  error: string;
  problems: { field: string; rule: string }[];
}

/** Every answer of the first batch, by transaction id. */
const answers = new Map<string, Answer>();
/** What the test decided for each reviewed payment. */
const outcomes = new Map<string, "fraud" | "legitimate">();
const today = dayBefore(new Date(), 0);

beforeAll(async () => {
  worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "0.25", DRIFT_FLUSH_PAYMENTS: "10", DRIFT_FLUSH_SECONDS: "3600" } });
  db = await worker.db();
  live = await parseArtifact(await fitShopModel({ version: "m20260302-loop01" }));
  shadowModel = await parseArtifact(await fitShopModel({ version: "m20260302-loop02", seed: 12, cutoffRate: 0.05 }));
  expect((await worker.post("/v1/models", live, worker.tokens.admin)).status).toBe(201);
  expect((await worker.post("/v1/models", shadowModel, worker.tokens.admin)).status).toBe(201);
  expect((await worker.post(`/v1/models/${live.version}/activate`, {}, worker.tokens.admin)).status).toBe(200);
});
afterAll(async () => {
  await worker?.dispose();
});

const get = async <T>(path: string, token: string | null = worker.tokens.analyst): Promise<{ status: number; body: T }> => {
  const res = await worker.fetch(path, { token });
  return { status: res.status, body: (await res.json()) as T };
};
const post = async <T>(path: string, body: unknown, token: string | null = worker.tokens.admin): Promise<{ status: number; body: T }> => {
  const res = await worker.post(path, body, token);
  return { status: res.status, body: (await res.json()) as T };
};

async function scoreBatch(prefix: string, count: number, seed: number, unusual: number): Promise<Answer[]> {
  const typical = shopPayments(count, seed).map((p, i) => scoreBody(`${prefix}-${i}`, p));
  const odd = Array.from({ length: unusual }, (_, k) => ({ transactionId: `${prefix}-odd-${k}`, features: { ...UNUSUAL_PAYMENT, amount: 1800 + 97 * k }, segment: "web" }));
  const res = await post<{ results: { outcome: string; result: Answer }[] }>("/v1/score/batch", { payments: [...typical, ...odd] }, worker.tokens.flow);
  expect(res.status).toBe(200);
  return res.body.results.map((r) => {
    expect(r.outcome).toBe("scored");
    return r.result;
  });
}

async function volumeScored(): Promise<number> {
  const row = await db.prepare("SELECT COALESCE(SUM(scored), 0) AS n FROM daily_volume WHERE model_version = ?1").bind(live.version).first<{ n: number }>();
  return Number(row?.n ?? 0);
}

describe("traffic counts", () => {
  it("are flushed through the queue once enough payments are scored, bucketed on the artifact's reference edges", async () => {
    for (const a of await scoreBatch("tx-loop", 40, 31, 8)) answers.set(a.transactionId, a);
    await eventually(async () => ((await volumeScored()) === 48 ? true : undefined), 15_000);
    const volume = await db
      .prepare("SELECT day, SUM(scored) AS scored, SUM(flagged) AS flagged FROM daily_volume WHERE model_version = ?1 GROUP BY day")
      .bind(live.version)
      .all<{ day: string; scored: number; flagged: number }>();
    const flagged = [...answers.values()].filter((a) => a.decision === "review").length;
    expect(volume.results).toEqual([{ day: today, scored: 48, flagged }]);
    // Independent bucketing of the answers' d² and of ln(amount) (the first model column).
    const expectedScore = new Array(10).fill(0);
    for (const a of answers.values()) expectedScore[bucketIndex(live.reference.scoreEdges, a.mahalanobisSq)]++;
    const stored = await db
      .prepare("SELECT bucket, SUM(count) AS n FROM drift_counts WHERE model_version = ?1 AND name = 'mahalanobisSq' GROUP BY bucket")
      .bind(live.version)
      .all<{ bucket: number; n: number }>();
    const storedScore = new Array(10).fill(0);
    for (const r of stored.results) storedScore[r.bucket] = r.n;
    expect(storedScore).toEqual(expectedScore);
    expect(live.columns[0]).toBe("amount");
    const amountRows = await db.prepare("SELECT SUM(count) AS n FROM drift_counts WHERE model_version = ?1 AND name = 'amount'").bind(live.version).first<{ n: number }>();
    expect(amountRows?.n).toBe(48);
  });

  it("are added once when the same flush is delivered again, alone or twice in one batch", async () => {
    const queue = await worker.mf.getQueueProducer<CountsMessage>("FLAGS");
    const flushed = await db.prepare("SELECT flush_id FROM count_flushes WHERE model_version = ?1").bind(live.version).all<{ flush_id: string }>();
    expect(flushed.results.length).toBeGreaterThan(0);
    const message = (flushId: string, scored: number): CountsMessage => ({
      kind: "counts",
      flushId,
      modelVersion: live.version,
      day: today,
      volumes: [["web", scored, 1]],
      buckets: [["web", "mahalanobisSq", 0, scored]],
    });
    // A redelivery of an already counted flush, a new flush sent twice in one batch, and a sentinel.
    await queue.sendBatch([{ body: message(flushed.results[0].flush_id, 48) }, { body: message("redelivery-test-0001", 7) }, { body: message("redelivery-test-0001", 7) }]);
    await queue.send(message("redelivery-sentinel-0002", 5));
    await eventually(async () => ((await countRows(db, "count_flushes", "flush_id = ?1", "redelivery-sentinel-0002")) === 1 ? true : undefined), 15_000);
    await eventually(async () => ((await countRows(db, "count_flushes", "flush_id = ?1", "redelivery-test-0001")) === 1 ? true : undefined), 15_000);
    expect(await volumeScored()).toBe(48 + 7 + 5);
  });
});

describe("the labelled operating table", () => {
  it("reads every decision with its weight and computes the operating point and estimates at a cutoff", async () => {
    const reviewed = [...answers.values()].filter((a) => a.decision === "review" || a.auditSample);
    const ids = await eventually(async () => {
      const { results } = await db.prepare("SELECT id, transaction_id FROM review_items WHERE model_version = ?1").bind(live.version).all<{ id: number; transaction_id: string }>();
      return results.length === reviewed.length ? results : undefined;
    }, 15_000);
    expect(reviewed.some((a) => a.auditSample)).toBe(true);
    // Invented labels: the unusual payments are fraud except the last two; of the audit draws, the
    // one with the largest d² is fraud (a fraud the cutoff missed).
    const largestAudit = reviewed.filter((a) => a.auditSample).sort((a, b) => b.mahalanobisSq - a.mahalanobisSq)[0];
    for (const [k, { id, transaction_id }] of ids.entries()) {
      const outcome = /-odd-[0-5]$/.test(transaction_id) || transaction_id === largestAudit.transactionId ? "fraud" : "legitimate";
      outcomes.set(transaction_id, outcome);
      const claim = await post(`/v1/review/items/${id}/claim`, {}, worker.tokens.analyst);
      expect(claim.status, JSON.stringify(claim.body)).toBe(200);
      const decision = await post(`/v1/review/items/${id}/decision`, { outcome }, worker.tokens.analyst);
      expect(decision.status, JSON.stringify(decision.body)).toBe(200);
      if (k === 0) {
        // One decision on a day whose other items still wait: held back until the day is finished.
        const early = (await get<{ labels: { labelled: number; undecided: number; heldBack: number } }>("/v1/insights/operating")).body.labels;
        expect(early).toMatchObject({ labelled: 0, undecided: ids.length - 1, heldBack: 1 });
      }
    }
    const cutoff = live.cutoff.mahalanobisSq;
    const { status, body } = await get<{
      labels: { labelled: number; fraudCount: number; fraud: number[]; weight: number[] };
      traffic: { scored: number; scoredPerDay: number };
      atCutoff: {
        point: { truePositives: number; falsePositives: number; falseNegatives: number; precision: number; recall: number; flagRate: number };
        estimates: { recall: { value: number; low: number; high: number }; tooFewLabels: boolean; reasons: string[] };
        expectedFlagsPerDay: number;
      };
    }>(`/v1/insights/operating?cutoff=${cutoff}`);
    expect(status).toBe(200);
    expect(body.labels.labelled).toBe(reviewed.length);
    expect(body.labels.fraudCount).toBe(7);
    expect(body.labels.fraud.reduce((a, b) => a + b, 0)).toBe(7);
    // By hand: weight 1 for flags, 1 / 0.25 = 4 for audit draws.
    let tp = 0,
      fp = 0,
      fn = 0,
      total = 0;
    for (const a of reviewed) {
      const w = a.decision === "review" ? 1 : 4;
      const fraud = outcomes.get(a.transactionId) === "fraud";
      const flags = a.mahalanobisSq > cutoff;
      total += w;
      if (fraud && flags) tp += w;
      else if (!fraud && flags) fp += w;
      else if (fraud) fn += w;
    }
    expect(body.labels.weight.slice().sort()).toEqual(reviewed.map((a) => (a.decision === "review" ? 1 : 4)).sort());
    const point = body.atCutoff.point;
    expect([point.truePositives, point.falsePositives, point.falseNegatives]).toEqual([tp, fp, fn]);
    expect(point.precision).toBeCloseTo(tp / (tp + fp), 12);
    expect(point.recall).toBeCloseTo(tp / (tp + fn), 12);
    expect(body.atCutoff.estimates.recall.value).toBeCloseTo(tp / (tp + fn), 12);
    // One audit fraud is far below the ten the estimates need to be trusted.
    expect(body.atCutoff.estimates.tooFewLabels).toBe(true);
    expect(body.traffic.scored).toBe(60);
    expect(body.atCutoff.expectedFlagsPerDay).toBeCloseTo(((tp + fp) / total) * 60, 9);
  });

  it("says why no figures exist for a version without decisions", async () => {
    const { status, body } = await get<{ atCutoff: null; unavailable: string; labels: { labelled: number } }>(`/v1/insights/operating?version=${shadowModel.version}&cutoff=10`);
    expect(status).toBe(200);
    expect(body.labels.labelled).toBe(0);
    expect(body.atCutoff).toBeNull();
    expect(body.unavailable).toContain("no decided review items");
  });
});

describe("shadow comparison and histogram", () => {
  it("shows both models' flag rates and their agreement on the traffic scored so far", async () => {
    const set = await worker.fetch("/v1/models/shadow", {
      method: "PUT",
      headers: { "content-type": "application/json" },
      body: JSON.stringify({ version: shadowModel.version }),
      token: worker.tokens.admin,
    });
    expect(set.status).toBe(200);
    const scored = await scoreBatch("tx-shadow", 30, 47, 3);
    await eventually(async () => ((await countRows(db, "shadow_scores", "shadow_version = ?1", shadowModel.version)) === 33 ? true : undefined), 15_000);
    const { status, body } = await get<{ comparison: { payments: number; liveFlags: number; shadowFlags: number; bothFlags: number; agreement: number; liveFlagRate: number } }>(
      "/v1/insights/shadow",
    );
    expect(status).toBe(200);
    const c = body.comparison;
    expect(c.payments).toBe(33);
    expect(c.liveFlags).toBe(scored.filter((a) => a.decision === "review").length);
    const rows = await db
      .prepare("SELECT live_flagged, shadow_flagged FROM shadow_scores WHERE shadow_version = ?1")
      .bind(shadowModel.version)
      .all<{ live_flagged: number; shadow_flagged: number }>();
    const same = rows.results.filter((r) => r.live_flagged === r.shadow_flagged).length;
    expect(c.agreement).toBeCloseTo(same / 33, 12);
    expect(c.shadowFlags).toBe(rows.results.filter((r) => r.shadow_flagged === 1).length);
    expect(c.liveFlagRate).toBeCloseTo(c.liveFlags / 33, 12);
  });

  it("gives the d² histogram from the counted buckets with the reference edges", async () => {
    await eventually(async () => ((await volumeScored()) === 60 + 33 ? true : undefined), 15_000);
    const { status, body } = await get<{ edges: number[]; counts: number[]; payments: number; expectedShare: number }>("/v1/insights/histogram?days=1");
    expect(status).toBe(200);
    expect(body.edges).toEqual(live.reference.scoreEdges);
    expect(body.counts).toHaveLength(live.reference.scoreEdges.length + 1);
    expect(body.payments).toBe(93);
    expect(body.expectedShare).toBeCloseTo(0.1, 12);
  });
});

describe("publishing a cutoff and rolling back", () => {
  it("stores a retuned version that verifies, activates it, audits who and why, and rollback restores the previous one", async () => {
    const newCutoff = Math.round(live.cutoff.mahalanobisSq * 1.25 * 1000) / 1000;
    const { status, body } = await post<{ version: string; fromVersion: string; pointer: { version: string; previous: string[] } }>("/v1/insights/publish-cutoff", {
      fromVersion: live.version,
      cutoffMahalanobisSq: newCutoff,
      flagRate: 0.01,
      reason: "fewer flags while the desk is short-staffed",
      confirm: "publish",
    });
    expect(status, JSON.stringify(body)).toBe(201);
    expect(body.version).not.toBe(live.version);
    expect(body.pointer.version).toBe(body.version);
    expect(body.pointer.previous[0]).toBe(live.version);
    const stored = await (await worker.kv()).get(`model:${body.version}`, "text");
    const tuned = await parseArtifact(stored!);
    expect(tuned.cutoff.mahalanobisSq).toBe(newCutoff);
    expect(tuned.cutoff.basis).toBe("manual");
    expect(tuned.segments).toEqual(live.segments);
    const events = await db
      .prepare("SELECT actor, action, from_version, to_version, detail FROM model_events ORDER BY id DESC LIMIT 2")
      .all<{ actor: string; action: string; from_version: string | null; to_version: string; detail: string }>();
    expect(events.results.map((e) => [e.actor, e.action, e.to_version])).toEqual([
      ["ops-ana", "activate", body.version],
      ["ops-ana", "upload", body.version],
    ]);
    expect(events.results[0].detail).toContain("fewer flags while the desk is short-staffed");
    const scored = await post<Answer>("/v1/score", scoreBody("tx-after-publish", shopPayments(1, 99)[0]), worker.tokens.flow);
    expect(scored.body.modelVersion).toBe(body.version);
    const operatingOfTuned = (await get<{ labelVersions: string[]; labels: { labelled: number; heldBack: number } }>("/v1/insights/operating")).body;

    const rolledBack = await post<{ pointer: { version: string } }>("/v1/models/rollback", {});
    expect(rolledBack.status).toBe(200);
    expect(rolledBack.body.pointer.version).toBe(live.version);
    // While the retuned version was live, the decisions made under its parent were its labels too
    // (same parameters, so the same d²); today's are held back while the payments scored since wait.
    expect(operatingOfTuned.labelVersions).toEqual([body.version, live.version]);
    expect(operatingOfTuned.labels.labelled + operatingOfTuned.labels.heldBack).toBe(outcomes.size);
    const page = await get<{ active: { version: string; cutoff: { mahalanobisSq: number } } }>("/v1/insights/model");
    expect(page.body.active.version).toBe(live.version);
    expect(page.body.active.cutoff.mahalanobisSq).toBe(live.cutoff.mahalanobisSq);
  });

  it("refuses a stale page, the live cutoff again, and a missing confirmation, naming the field", async () => {
    const base = { fromVersion: live.version, cutoffMahalanobisSq: 30, flagRate: null, reason: "test", confirm: "publish" };
    const stale = await post<Refusal>("/v1/insights/publish-cutoff", { ...base, fromVersion: "m20260101-00000000" });
    expect(stale.status).toBe(409);
    expect(stale.body.problems[0]).toMatchObject({ field: "fromVersion" });
    expect(stale.body.problems[0].rule).toContain(live.version);
    const same = await post<Refusal>("/v1/insights/publish-cutoff", { ...base, cutoffMahalanobisSq: live.cutoff.mahalanobisSq });
    expect(same.status).toBe(409);
    expect(same.body.problems[0].field).toBe("cutoffMahalanobisSq");
    const unconfirmed = await post<Refusal>("/v1/insights/publish-cutoff", { ...base, confirm: "yes" });
    expect(unconfirmed.status).toBe(400);
    expect(unconfirmed.body.problems).toEqual([{ field: "confirm", rule: expect.stringContaining('must be the string "publish"') }]);
    const bad = await post<Refusal>("/v1/insights/publish-cutoff", { fromVersion: live.version, cutoffMahalanobisSq: -1, flagRate: 2, reason: "", confirm: "publish", extra: 1 });
    expect(bad.status).toBe(400);
    expect(bad.body.problems.map((p) => p.field).sort()).toEqual(["cutoffMahalanobisSq", "extra", "flagRate", "reason"]);
  });
});

describe("access and bad input", () => {
  const reads = ["/v1/insights/model", "/v1/insights/operating", "/v1/insights/shadow", "/v1/insights/histogram"];

  it("lets analysts read every insights route and refuses the payment flow and anonymous callers", async () => {
    for (const path of reads) {
      expect((await get(path)).status, path).toBe(200);
      expect((await get(path, worker.tokens.admin)).status, path).toBe(200);
      const flow = await get<Refusal>(path, worker.tokens.flow);
      expect(flow.status, path).toBe(403);
      expect(flow.body.problems[0].rule).toContain("role flow may not call");
      expect((await get(path, null)).status, path).toBe(401);
    }
  });

  it("lets only admins publish a cutoff", async () => {
    const body = { fromVersion: live.version, cutoffMahalanobisSq: 30, flagRate: null, reason: "analyst attempt", confirm: "publish" };
    const analyst = await post<Refusal>("/v1/insights/publish-cutoff", body, worker.tokens.analyst);
    expect(analyst.status).toBe(403);
    expect(analyst.body.problems[0].rule).toContain("role analyst may not call POST /v1/insights/publish-cutoff");
    expect((await post("/v1/insights/publish-cutoff", body, worker.tokens.flow)).status).toBe(403);
    expect((await post("/v1/insights/publish-cutoff", body, null)).status).toBe(401);
  });

  it.each([
    ["/v1/insights/model?days=0", "days", "from 1 to 90"],
    ["/v1/insights/model?days=7days", "days", "whole number"],
    ["/v1/insights/model?version=x", "version", "not an accepted field"],
    ["/v1/insights/operating?cutoff=-1", "cutoff", "squared distance"],
    ["/v1/insights/operating?cutoff=1&cutoff=2", "cutoff", "given once"],
    ["/v1/insights/histogram?version=a%20b", "version", "printable ASCII"],
    ["/v1/insights/shadow?shadowVersion=", "shadowVersion", "1 to 200"],
  ])("refuses %s naming %s", async (path, field, rule) => {
    const { status, body } = await get<Refusal>(path);
    expect(status).toBe(400);
    expect(body.error).toBe("invalid-query");
    expect(body.problems[0].field).toBe(field);
    expect(body.problems[0].rule).toContain(rule);
  });

  it("answers 404 naming the version when it is not stored", async () => {
    const { status, body } = await get<Refusal>("/v1/insights/operating?version=m20990101-ffffffff");
    expect(status).toBe(404);
    expect(body.problems[0].field).toBe("version");
  });
});
