/**
 * Fuzzing the admin model routes that write, in process: FUZZ_RUNS (10,000) hostile requests to each
 * of upload, shadow and rollback. Every answer must be a 4xx naming the field and the rule, never a
 * 5xx; the active pointer, the stored versions and the model event log must be exactly as before.
 * Generators and setup: ./fuzz-models-kit.ts.
 */
import { describe, test } from "vitest";
import { fuzzEndpoint } from "./fuzz-kit";
import { modelFuzzApp, rollbackRequests, shadowRequests, uploadRequests } from "./fuzz-models-kit";

const app = modelFuzzApp();

describe("fuzzing the model routes that write", { timeout: 600_000 }, () => {
  test("POST /v1/models refuses every artifact with a defect, naming the field and the rule", async () => {
    await fuzzEndpoint(app.worker, "POST /v1/models", uploadRequests(app.candidate, app.worker.tokens.admin));
  });

  test("POST /v1/models/rollback refuses every attempt while there is no earlier version", async () => {
    await fuzzEndpoint(app.worker, "POST /v1/models/rollback", rollbackRequests(app.worker.tokens.admin));
  });

  test("PUT /v1/models/shadow refuses every hostile body", async () => {
    await fuzzEndpoint(app.worker, "PUT /v1/models/shadow", shadowRequests(app.worker.tokens.admin));
  });

  test("the pointer, the stored versions and the event log are exactly as before", async () => {
    await app.expectNothingChanged();
  });
});
