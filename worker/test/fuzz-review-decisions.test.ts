/**
 * Fuzzing the review API's decisions in process: FUZZ_RUNS (10,000) hostile requests to the
 * decision, the account decision and undo — bad ids, bodies broken in one definite way, and
 * well-formed decisions without a claim. Each must answer a 4xx naming the field and the rule;
 * nothing may be claimed, decided or written. Generators and setup: ./fuzz-review-kit.ts.
 */
import fc from "fast-check";
import { describe, test } from "vitest";
import { fuzzEndpoint, hostileString, jsonHeaders, notAString, type FuzzRequest } from "./fuzz-kit";
import { decisionRequests, idRequests, reviewFuzzApp } from "./fuzz-review-kit";

const app = reviewFuzzApp("decisions");

describe("fuzzing the review API's decisions", { timeout: 600_000 }, () => {
  test("POST /v1/review/items/{id}/decision refuses bad ids and every broken or unclaimed decision", async () => {
    const ids = idRequests("POST", "/decision", app.worker.tokens.analyst, fc.constant(JSON.stringify({ outcome: "fraud" })));
    await fuzzEndpoint(
      app.worker,
      "POST /v1/review/items/{id}/decision",
      fc.oneof({ weight: 1, arbitrary: ids }, { weight: 3, arbitrary: decisionRequests(app.worker.tokens.analyst) }),
    );
  });

  // GET …/account-flags takes nothing but the id, read by the same itemId() the routes fuzzed here use.
  test("POST /v1/review/items/{id}/account-decision refuses bad ids, every broken body and a payment without an account", async () => {
    const token = app.worker.tokens.analyst;
    const ids = idRequests("POST", "/account-decision", token, fc.constant(JSON.stringify({ ids: [1], outcome: "fraud" })));
    const badIds = fc
      .oneof(
        notAString.filter((v) => !Array.isArray(v)),
        fc.array(fc.oneof(fc.constantFrom(0, -1, 1.5, 2 ** 53, "1", null), hostileString), { minLength: 1, maxLength: 4 }),
        fc.constant([]),
        fc.constant(Array.from({ length: 51 }, (_, k) => k + 1)),
        fc.constant([1, 1]),
      )
      .map(
        (v): FuzzRequest => ({
          method: "POST",
          path: "/v1/review/items/1/account-decision",
          headers: jsonHeaders(token),
          body: JSON.stringify({ ids: v, outcome: "fraud" }),
          broke: "ids",
        }),
      );
    await fuzzEndpoint(
      app.worker,
      "POST /v1/review/items/{id}/account-decision",
      fc.oneof({ weight: 1, arbitrary: ids }, { weight: 1, arbitrary: badIds }, { weight: 3, arbitrary: decisionRequests(token, "account-decision", { ids: [1, 2, 3] }) }),
    );
  });

  test("POST /v1/review/items/{id}/undo refuses malformed and unknown ids", async () => {
    await fuzzEndpoint(app.worker, "POST /v1/review/items/{id}/undo", idRequests("POST", "/undo", app.worker.tokens.analyst));
  });

  test("nothing was claimed, decided or written", async () => {
    await app.expectNothingWritten();
  });
});
