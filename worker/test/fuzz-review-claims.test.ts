/**
 * Fuzzing the review API's claim and release in process: FUZZ_RUNS (10,000) hostile ids to each.
 * Each must answer a 4xx naming the field and the rule; nothing may be claimed, decided or written.
 * Generators and setup: ./fuzz-review-kit.ts.
 */
import { describe, test } from "vitest";
import { fuzzEndpoint } from "./fuzz-kit";
import { idRequests, reviewFuzzApp } from "./fuzz-review-kit";

const app = reviewFuzzApp("claims");

describe("fuzzing the review API's claims", { timeout: 600_000 }, () => {
  for (const action of ["claim", "release"]) {
    test(`POST /v1/review/items/{id}/${action} refuses malformed and unknown ids`, async () => {
      await fuzzEndpoint(app.worker, `POST /v1/review/items/{id}/${action}`, idRequests("POST", `/${action}`, app.worker.tokens.analyst));
    });
  }

  test("nothing was claimed, decided or written", async () => {
    await app.expectNothingWritten();
  });
});
