/**
 * Fuzzing the admin model routes that name versions, in process: FUZZ_RUNS (10,000) hostile requests
 * to each of list, read one and activate. Every answer must be a 4xx naming the field and the rule
 * (list may answer its page where the input is merely ignored), never a 5xx; the active pointer, the
 * stored versions and the model event log must be exactly as before. Generators and setup:
 * ./fuzz-models-kit.ts.
 */
import { describe, test } from "vitest";
import { fuzzEndpoint, okOr4xx } from "./fuzz-kit";
import { listRequests, modelFuzzApp, versionPathRequests } from "./fuzz-models-kit";

const app = modelFuzzApp();

describe("fuzzing the model routes that name versions", { timeout: 600_000 }, () => {
  test("GET /v1/models answers hostile cursors and parameters with a page or a 4xx, never a 5xx", async () => {
    await fuzzEndpoint(app.worker, "GET /v1/models", listRequests(app.worker.tokens.admin), { allowed: okOr4xx });
  });

  test("GET /v1/models/{version} refuses hostile and unknown versions", async () => {
    await fuzzEndpoint(app.worker, "GET /v1/models/{version}", versionPathRequests("GET", "", app.worker.tokens.admin));
  });

  test("POST /v1/models/{version}/activate refuses hostile and unknown versions", async () => {
    await fuzzEndpoint(app.worker, "POST /v1/models/{version}/activate", versionPathRequests("POST", "/activate", app.worker.tokens.admin));
  });

  test("the pointer, the stored versions and the event log are exactly as before", async () => {
    await app.expectNothingChanged();
  });
});
