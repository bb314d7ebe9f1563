/**
 * Fuzzing the review API's claim, release and item history in process: FUZZ_RUNS (10,000) hostile
 * ids and page queries to each. Each must answer a 4xx naming the field and the rule; nothing may be
 * claimed, decided or written. Generators and setup: ./fuzz-review-kit.ts.
 */
import fc from "fast-check";
import { describe, test } from "vitest";
import { fuzzEndpoint, hostileString, jsonHeaders, queryString, type FuzzRequest } from "./fuzz-kit";
import { idRequests, queryRequests, reviewFuzzApp } from "./fuzz-review-kit";

const app = reviewFuzzApp("claims");

describe("fuzzing the review API's claims and item history", { timeout: 600_000 }, () => {
  for (const action of ["claim", "release"]) {
    test(`POST /v1/review/items/{id}/${action} refuses malformed and unknown ids`, async () => {
      await fuzzEndpoint(app.worker, `POST /v1/review/items/{id}/${action}`, idRequests("POST", `/${action}`, app.worker.tokens.analyst));
    });
  }

  test("GET /v1/review/items/{id}/events refuses malformed and unknown ids and every broken page query", async () => {
    const token = app.worker.tokens.analyst;
    const pages = queryRequests("/v1/review/items/1/events", ["before", "limit"], token, fc.constantFrom<[string, string]>(["limit", "5"]));
    const badBefore = fc
      .oneof(
        fc.constantFrom("0", "-1", "01", "1.5", "1e3", "99999999999999999", ""),
        hostileString.filter((v) => !/^[1-9]\d{0,15}$/.test(v)),
      )
      .map((v): FuzzRequest => ({ method: "GET", path: `/v1/review/items/1/events${queryString([["before", v]])}`, headers: jsonHeaders(token), broke: "before" }));
    await fuzzEndpoint(app.worker, "GET /v1/review/items/{id}/events", fc.oneof(idRequests("GET", "/events", token), pages, badBefore));
  });

  test("nothing was claimed, decided or written", async () => {
    await app.expectNothingWritten();
  });
});
