/**
 * Fuzzing the analyst's own views in process: FUZZ_RUNS (10,000) hostile query strings, methods and
 * bodies to who-am-I and the queue summary, routes that take no input. Each must answer its usual
 * 200 or a 4xx naming the field and the rule, never a 5xx; nothing may be claimed, decided or
 * written. The store holds real flags so that the summary has rows to read. Generators and setup:
 * ./fuzz-review-kit.ts.
 */
import { describe, test } from "vitest";
import { fuzzEndpoint, okOr4xx } from "./fuzz-kit";
import { inputless, reviewFuzzApp } from "./fuzz-review-kit";

const app = reviewFuzzApp("summary");

describe("fuzzing the analyst's own views", { timeout: 600_000 }, () => {
  for (const path of ["/v1/review/me", "/v1/review/summary"]) {
    test(`GET ${path} answers hostile queries, methods and bodies with 200 or a 4xx, never a 5xx`, async () => {
      await fuzzEndpoint(app.worker, `GET ${path}`, inputless("GET", path, app.worker.tokens.analyst), { allowed: okOr4xx });
    });
  }

  test("nothing was claimed, decided or written", async () => {
    await app.expectNothingWritten();
  });
});
