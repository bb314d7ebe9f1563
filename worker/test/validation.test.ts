/**
 * Every refusal rule of the scoring routes, in process (./in-process.ts: the app with real local
 * KV, D1, Queues and Durable Objects): each answer is a 4xx whose JSON
 * names the field and the rule, and nothing of a refused request is stored (no review row, no
 * remembered answer: the same transactionId sent correctly afterwards is scored, not a 409).
 */
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { countRows, eventually, publishModel, queueDelivered } from "./harness";
import { startApp, type InProcessWorker } from "./in-process";
import { fitShopModel, UNUSUAL_PAYMENT } from "./fixtures";
import { describeRequest } from "./fuzz-kit";

let worker: InProcessWorker;

beforeAll(async () => {
  worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0", AUDIT_SAMPLE_RATE: "1" } });
  await publishModel(worker, await fitShopModel({ version: "mshop-v" }));
});
afterAll(async () => {
  await worker?.dispose();
});

interface ErrorBody {
  error: string;
  problems: { field: string; rule: string }[];
}

/** Sends raw text as a score request and returns status and body. */
async function sendRaw(text: string, contentType: string | null = "application/json"): Promise<{ status: number; body: ErrorBody }> {
  const headers: Record<string, string> = {};
  if (contentType !== null) headers["content-type"] = contentType;
  const response = await worker.fetch("/v1/score", { method: "POST", headers, body: text, token: worker.tokens.flow });
  return { status: response.status, body: (await response.json()) as ErrorBody };
}

/**
 * Every rejected id is sent again correctly at the end: a 200 there proves nothing was remembered,
 * and the review-row count (AUDIT_SAMPLE_RATE = 1 sends every payment to review) proves nothing
 * was stored before that.
 */
const rejectedIds = new Set<string>();

async function expectRefused(body: unknown, status: number, error: string, problems: { field: string; rule: string | RegExp }[]): Promise<void> {
  const text = typeof body === "string" ? body : JSON.stringify(body);
  const id =
    typeof body === "object" && body !== null && typeof (body as { transactionId?: unknown }).transactionId === "string" ? (body as { transactionId: string }).transactionId : null;
  if (id) rejectedIds.add(id);
  const answer = await sendRaw(text);
  // Every failure names the request that caused it.
  const request = describeRequest({ method: "POST", path: "/v1/score", headers: { "content-type": "application/json", authorization: "Bearer <flow>" }, body: text });
  expect(answer.status, `${request} answered ${JSON.stringify(answer.body)}`).toBe(status);
  expect(answer.body.error, request).toBe(error);
  for (const expected of problems) {
    const match = answer.body.problems.find((p) => p.field === expected.field);
    expect(match, `${request}: no problem for ${expected.field} in ${JSON.stringify(answer.body.problems)}`).toBeDefined();
    if (typeof expected.rule === "string") expect(match!.rule, request).toBe(expected.rule);
    else expect(match!.rule, request).toMatch(expected.rule);
  }
}

describe("features", () => {
  test("a missing feature is named with the rule that it is required", async () => {
    const { hourOfDay: _dropped, ...rest } = UNUSUAL_PAYMENT;
    await expectRefused({ transactionId: "v-missing", features: rest }, 400, "invalid-request", [{ field: "features.hourOfDay", rule: /^is required/ }]);
  });

  test("an unknown feature is named, with the model's feature names", async () => {
    await expectRefused({ transactionId: "v-unknown", features: { ...UNUSUAL_PAYMENT, cardNumber: 4111 } }, 400, "invalid-request", [
      { field: "features.cardNumber", rule: "is not a feature of model mshop-v; expected only: amount, items, shippingShare, accountAgeDays, hourOfDay" },
    ]);
  });

  test("a non-numeric value, a number sent as a string, null and a NaN-ish string are refused", async () => {
    await expectRefused(
      { transactionId: "v-types", features: { ...UNUSUAL_PAYMENT, amount: "2450", items: true, shippingShare: null, accountAgeDays: "NaN" } },
      400,
      "invalid-request",
      [
        { field: "features.amount", rule: 'must be a number. Actual: string "2450"' },
        { field: "features.items", rule: "must be a number. Actual: boolean true" },
        { field: "features.shippingShare", rule: "must be a number. Actual: null" },
        { field: "features.accountAgeDays", rule: 'must be a number. Actual: string "NaN"' },
      ],
    );
  });

  test("Infinity (a JSON number like 1e400 that overflows) is refused as not finite", async () => {
    const text = `{"transactionId":"v-inf","features":{"amount":1e400,"items":1,"shippingShare":0.1,"accountAgeDays":3,"hourOfDay":12}}`;
    rejectedIds.add("v-inf");
    await expectRefused(text, 400, "invalid-request", [{ field: "features.amount", rule: "must be a finite number. Actual: Infinity" }]);
  });

  test("a value outside its transform's domain is refused with the transform's rule", async () => {
    await expectRefused({ transactionId: "v-domain", features: { ...UNUSUAL_PAYMENT, amount: 0 } }, 400, "invalid-request", [{ field: "features.amount", rule: /log/ }]);
  });

  test("a __proto__ key inside features is an unknown feature, and at the top level an unknown field", async () => {
    const inside = `{"transactionId":"v-proto-1","features":{"__proto__":{"amount":1},"amount":2450,"items":1,"shippingShare":0.01,"accountAgeDays":1,"hourOfDay":4.25}}`;
    rejectedIds.add("v-proto-1");
    await expectRefused(inside, 400, "invalid-request", [{ field: "features.__proto__", rule: /^is not a feature of model mshop-v/ }]);
    const top = `{"transactionId":"v-proto-2","__proto__":{"x":1},"features":${JSON.stringify(UNUSUAL_PAYMENT)}}`;
    rejectedIds.add("v-proto-2");
    await expectRefused(top, 400, "invalid-request", [{ field: "__proto__", rule: "is not an accepted field; accepted: transactionId, features, payment, segment, accountRef" }]);
  });

  test("features that are not an object are refused", async () => {
    await expectRefused({ transactionId: "v-array", features: [1, 2, 3] }, 400, "invalid-request", [
      { field: "features", rule: "must be an object keyed by feature name. Actual: an array of 3" },
    ]);
  });
});

describe("envelope", () => {
  test("a missing transactionId, an unknown top-level key and an over-long segment are each named", async () => {
    await expectRefused({ features: UNUSUAL_PAYMENT, channel: "web", segment: "x".repeat(65) }, 400, "invalid-request", [
      { field: "transactionId", rule: "is required: expected a string" },
      { field: "channel", rule: "is not an accepted field; accepted: transactionId, features, payment, segment, accountRef" },
      { field: "segment", rule: /^must be 1 to 64 characters\. Actual: string/ },
    ]);
  });

  test("transactionId must be 1–128 printable characters without spaces", async () => {
    await expectRefused({ transactionId: "", features: UNUSUAL_PAYMENT }, 400, "invalid-request", [{ field: "transactionId", rule: /^must be 1 to 128 characters/ }]);
    await expectRefused({ transactionId: "a".repeat(129), features: UNUSUAL_PAYMENT }, 400, "invalid-request", [{ field: "transactionId", rule: /^must be 1 to 128 characters/ }]);
    await expectRefused({ transactionId: "pay 1\n", features: UNUSUAL_PAYMENT }, 400, "invalid-request", [
      { field: "transactionId", rule: /^must be printable ASCII without spaces/ },
    ]);
    await expectRefused({ transactionId: 42, features: UNUSUAL_PAYMENT }, 400, "invalid-request", [{ field: "transactionId", rule: "must be a string. Actual: number 42" }]);
  });

  test("accountRef over 128 characters is refused", async () => {
    await expectRefused({ transactionId: "v-acct", features: UNUSUAL_PAYMENT, accountRef: "a".repeat(129) }, 400, "invalid-request", [
      { field: "accountRef", rule: /^must be 1 to 128 characters/ },
    ]);
  });

  test("a body that is not an object is refused", async () => {
    await expectRefused("[1,2]", 400, "invalid-request", [{ field: "body", rule: "must be an object. Actual: an array of 2" }]);
  });
});

describe("transport", () => {
  test("malformed JSON is a 400 naming the body", async () => {
    const answer = await sendRaw(`{"transactionId":"v-json",`);
    expect(answer.status).toBe(400);
    expect(answer.body.error).toBe("invalid-json");
    expect(answer.body.problems[0].field).toBe("body");
    expect(answer.body.problems[0].rule).toMatch(/^must be valid JSON\. Actual: /);
    expect((await sendRaw("")).body.problems[0].rule).toBe("must be a JSON document. Actual: an empty body");
  });

  test("a wrong or missing content type is a 415 naming the header", async () => {
    const text = JSON.stringify({ transactionId: "v-ct", features: UNUSUAL_PAYMENT });
    rejectedIds.add("v-ct");
    const plain = await sendRaw(text, "text/plain");
    expect(plain.status).toBe(415);
    expect(plain.body).toEqual({ error: "unsupported-media-type", problems: [{ field: "content-type", rule: 'must be application/json. Actual: "text/plain"' }] });
    const form = await sendRaw(text, "application/x-www-form-urlencoded");
    expect(form.status).toBe(415);
    const withCharset = JSON.stringify({ transactionId: "v-ct-ok", features: UNUSUAL_PAYMENT });
    expect((await sendRaw(withCharset, "application/json; charset=utf-8")).status).toBe(200);
  });

  test("a body over 16 KiB is a 413, whether declared by Content-Length or only streamed", async () => {
    const big = JSON.stringify({ transactionId: "v-big", features: UNUSUAL_PAYMENT, padding: "x".repeat(17_000) });
    rejectedIds.add("v-big");
    const declared = await sendRaw(big);
    expect(declared.status).toBe(413);
    expect(declared.body.problems[0].field).toBe("body");
    expect(declared.body.problems[0].rule).toMatch(/^must be at most 16384 bytes\. Actual: /);
    const encoder = new TextEncoder();
    const stream = new ReadableStream<Uint8Array>({
      start(controller) {
        for (let i = 0; i < 20; i++) controller.enqueue(encoder.encode("x".repeat(1000)));
        controller.close();
      },
    });
    const streamed = await worker.fetch("/v1/score", {
      method: "POST",
      headers: { "content-type": "application/json" },
      body: stream,
      duplex: "half",
      token: worker.tokens.flow,
    } as RequestInit & { duplex: string; token: string });
    expect(streamed.status).toBe(413);
  });

  test("invalid UTF-8 is refused", async () => {
    const response = await worker.fetch("/v1/score", {
      method: "POST",
      headers: { "content-type": "application/json" },
      body: new Uint8Array([0x7b, 0x22, 0xff, 0xfe, 0x22, 0x7d]),
      token: worker.tokens.flow,
    });
    expect(response.status).toBe(400);
    expect(((await response.json()) as ErrorBody).problems[0].rule).toMatch(/UTF-8/);
  });
});

describe("nothing from a refused request is kept", () => {
  test("no review row exists for any refused id, and each is scored normally when sent correctly", async () => {
    const db = await worker.db();
    // Once a marker scored after every refusal is stored, anything a refused request had sent would be too.
    await queueDelivered(worker, "v-marker");
    const ids = [...rejectedIds].filter((id) => id.length > 0 && id.length <= 128 && /^[\x21-\x7e]+$/.test(id));
    expect(ids.length).toBeGreaterThan(8);
    for (const id of ids) expect(await countRows(db, "review_items", "transaction_id = ?1", id), id).toBe(0);
    // Only the accepted requests of these tests (v-ct-ok and the marker) are in the store.
    expect(await countRows(db, "review_items")).toBe(2);
    for (const id of ids) {
      const response = await worker.post("/v1/score", { transactionId: id, features: UNUSUAL_PAYMENT }, worker.tokens.flow);
      expect(response.status, id).toBe(200);
    }
    await eventually(async () => ((await countRows(db, "review_items")) === ids.length + 2 ? true : undefined), 15_000);
  });
});
