import { describe, expect, test } from "vitest";
import { ConfigError, readSettings } from "./env";

describe("readSettings", () => {
  test("parses the values of wrangler.toml", () => {
    expect(readSettings({ AUDIT_SAMPLE_RATE: "0.002", MODEL_REFRESH_SECONDS: "10", MAX_BATCH: "100" })).toEqual({
      auditSampleRate: 0.002,
      modelRefreshMs: 10_000,
      maxBatch: 100,
    });
  });

  test("names every malformed variable with its rule and the value received", () => {
    let error: unknown;
    try {
      readSettings({ AUDIT_SAMPLE_RATE: "1.5", MODEL_REFRESH_SECONDS: "-1", MAX_BATCH: "12.5" });
    } catch (e) {
      error = e;
    }
    expect(error).toBeInstanceOf(ConfigError);
    expect((error as ConfigError).problems).toEqual([
      { field: "AUDIT_SAMPLE_RATE", rule: 'must be a decimal number from 0 to 1 (received "1.5")' },
      { field: "MODEL_REFRESH_SECONDS", rule: 'must be a number of seconds from 0 to 3600 (received "-1")' },
      { field: "MAX_BATCH", rule: 'must be an integer from 1 to 1000 (received "12.5")' },
    ]);
  });

  test("refuses a missing variable and text that only starts like a number", () => {
    expect(() => readSettings({ AUDIT_SAMPLE_RATE: "0.01abc", MODEL_REFRESH_SECONDS: "10", MAX_BATCH: "100" })).toThrow(/AUDIT_SAMPLE_RATE/);
    expect(() => readSettings({ AUDIT_SAMPLE_RATE: "0.01", MODEL_REFRESH_SECONDS: "10" } as never)).toThrow(/MAX_BATCH must be an integer from 1 to 1000 \(the variable is not set\)/);
  });
});
