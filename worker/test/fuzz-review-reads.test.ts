/**
 * Fuzzing the review API's reads in process: FUZZ_RUNS (10,000) hostile requests to the queue list,
 * the counts, the label export, one item and its history. Each must answer a 4xx naming the field and the rule;
 * nothing may be claimed, decided or written. Generators and setup: ./fuzz-review-kit.ts.
 */
import fc from "fast-check";
import { describe, test } from "vitest";
import { fuzzEndpoint, hostileString, jsonHeaders, queryString, type FuzzRequest } from "./fuzz-kit";
import { COUNT_KEYS, EXPORT_KEYS, idRequests, LIST_KEYS, queryRequests, reviewFuzzApp, validListPair } from "./fuzz-review-kit";

const app = reviewFuzzApp("reads");

describe("fuzzing the review API's reads", { timeout: 600_000 }, () => {
  test("GET /v1/review/items refuses every broken query", async () => {
    await fuzzEndpoint(app.worker, "GET /v1/review/items", queryRequests("/v1/review/items", LIST_KEYS, app.worker.tokens.analyst, validListPair));
  });

  test("GET /v1/review/counts refuses every broken query", async () => {
    const alongside = fc.constantFrom<[string, string]>(["selection", "audit"], ["segment", "app"]);
    await fuzzEndpoint(app.worker, "GET /v1/review/counts", queryRequests("/v1/review/counts", COUNT_KEYS, app.worker.tokens.analyst, alongside));
  });

  test("GET /v1/review/export refuses every broken query", async () => {
    const alongside = fc.constantFrom<[string, string]>(["modelVersion", app.modelVersion]);
    await fuzzEndpoint(app.worker, "GET /v1/review/export", queryRequests("/v1/review/export", EXPORT_KEYS, app.worker.tokens.analyst, alongside));
  });

  test("GET /v1/review/items/{id} refuses malformed and unknown ids", async () => {
    await fuzzEndpoint(app.worker, "GET /v1/review/items/{id}", idRequests("GET", "", app.worker.tokens.analyst));
  });

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
