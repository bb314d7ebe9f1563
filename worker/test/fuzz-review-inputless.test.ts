/**
 * Fuzzing routes that take no input in process: FUZZ_RUNS (10,000) hostile query strings, methods
 * and bodies to the review facets, `GET /v1/health` and `GET /openapi.json` (who-am-I and the
 * summary: ./fuzz-review-summary.test.ts). Each must answer its usual 200 or a 4xx naming the field
 * and the rule, never a 5xx; nothing may be claimed, decided or written. The store holds real flags
 * so that the facets have rows to read. Generators and setup: ./fuzz-review-kit.ts.
 */
import { describe, test } from "vitest";
import { fuzzEndpoint, okOr4xx } from "./fuzz-kit";
import { inputless, reviewFuzzApp } from "./fuzz-review-kit";

const app = reviewFuzzApp("inputless");

describe("fuzzing the routes that take no input", { timeout: 600_000 }, () => {
  for (const path of ["/v1/review/facets"]) {
    test(`GET ${path} answers hostile queries, methods and bodies with 200 or a 4xx, never a 5xx`, async () => {
      await fuzzEndpoint(app.worker, `GET ${path}`, inputless("GET", path, app.worker.tokens.analyst), { allowed: okOr4xx });
    });
  }

  for (const path of ["/v1/health", "/openapi.json"]) {
    test(`GET ${path} answers hostile queries, methods and bodies with 200 or a 4xx, never a 5xx`, async () => {
      await fuzzEndpoint(app.worker, `GET ${path}`, inputless("GET", path, null), { allowed: okOr4xx });
    });
  }

  test("nothing was claimed, decided or written", async () => {
    await app.expectNothingWritten();
  });
});
