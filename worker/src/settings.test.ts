import { readFileSync } from "node:fs";
import { describe, expect, test } from "vitest";
import { ConfigError } from "./env";
import { readSettings, settingsSchema } from "./settings";

/** The `[vars]` table of wrangler.toml as name → text (flat `NAME = "value"` lines). */
function wranglerVars(): Record<string, string> {
  const toml = readFileSync(new URL("../../wrangler.toml", import.meta.url), "utf8");
  const section = toml.split(/^\[vars\]$/m)[1].split(/^\[/m)[0];
  return Object.fromEntries([...section.matchAll(/^([A-Z0-9_]+) = "([^"]*)"$/gm)].map((m) => [m[1], m[2]]));
}

/** The ConfigError `run` throws (fails the test when it throws nothing or something else). */
function configError(run: () => unknown): ConfigError {
  try {
    run();
  } catch (error) {
    expect(error).toBeInstanceOf(ConfigError);
    return error as ConfigError;
  }
  throw new Error("expected a ConfigError");
}

describe("readSettings", () => {
  test("parses every variable of wrangler.toml, and the schema knows exactly those variables", () => {
    const vars = wranglerVars();
    expect(Object.keys(settingsSchema.shape).sort()).toEqual(Object.keys(vars).sort());
    expect(readSettings(vars)).toEqual({
      AUDIT_SAMPLE_RATE: 0.002,
      MODEL_REFRESH_SECONDS: 10,
      MAX_BATCH: 100,
      MAX_BATCH_ACCOUNTS: 25,
      DRIFT_FLUSH_PAYMENTS: 500,
      DRIFT_FLUSH_SECONDS: 30,
      REFIT_AFTER_DAYS: 28,
      SHADOW_WAIT_DAYS: 14,
      ANALYST_DAILY_CAPACITY: 200,
      IDEMPOTENCY_WINDOW_SECONDS: 86_400,
      PAYMENT_CLOCK_TOLERANCE_SECONDS: 300,
      HISTORY_TIMEOUT_MS: 250,
      RETENTION_DAYS: 365,
    });
  });

  test("takes 0 as 'no clock check' for payment times, and refuses a history timeout of 0", () => {
    expect(readSettings({ PAYMENT_CLOCK_TOLERANCE_SECONDS: "0" }, ["PAYMENT_CLOCK_TOLERANCE_SECONDS"])).toEqual({ PAYMENT_CLOCK_TOLERANCE_SECONDS: 0 });
    expect(configError(() => readSettings({ HISTORY_TIMEOUT_MS: "0" }, ["HISTORY_TIMEOUT_MS"])).problems).toEqual([
      { field: "HISTORY_TIMEOUT_MS", rule: 'must be a number of milliseconds from 1 to 30000 (received "0")' },
    ]);
  });

  test("reads only the variables asked for, so a malformed one elsewhere does not get in the way", () => {
    expect(readSettings({ MAX_BATCH: "25", DRIFT_FLUSH_PAYMENTS: "lots" }, ["MAX_BATCH"])).toEqual({ MAX_BATCH: 25 });
  });

  test("names every malformed variable with its rule and the text received", () => {
    const error = configError(() =>
      readSettings({ AUDIT_SAMPLE_RATE: "1.5", MODEL_REFRESH_SECONDS: "-1", MAX_BATCH: "12.5" }, ["AUDIT_SAMPLE_RATE", "MODEL_REFRESH_SECONDS", "MAX_BATCH"]),
    );
    expect(error.problems).toEqual([
      { field: "AUDIT_SAMPLE_RATE", rule: 'must be a number from 0 to 1 (received "1.5")' },
      { field: "MODEL_REFRESH_SECONDS", rule: 'must be a number of seconds from 0 to 3600 (received "-1")' },
      { field: "MAX_BATCH", rule: 'must be a whole number of payments from 1 to 1000 (received "12.5")' },
    ]);
  });

  test("applies one number rule to every variable: plain decimal text only", () => {
    for (const bad of ["0.01abc", "0x10", "1e", "", " ", "Infinity", "NaN", "+1", "1,5"]) {
      for (const name of Object.keys(settingsSchema.shape) as (keyof typeof settingsSchema.shape)[]) {
        const error = configError(() => readSettings({ [name]: bad }, [name]));
        expect(
          error.problems.map((p) => p.field),
          `${name}=${JSON.stringify(bad)}`,
        ).toEqual([name]);
      }
    }
    expect(readSettings({ DRIFT_FLUSH_SECONDS: " 2.5e1 " }, ["DRIFT_FLUSH_SECONDS"])).toEqual({ DRIFT_FLUSH_SECONDS: 25 });
  });

  test("refuses a missing variable, saying it is not set", () => {
    const error = configError(() => readSettings({}, ["ANALYST_DAILY_CAPACITY"]));
    expect(error.problems).toEqual([{ field: "ANALYST_DAILY_CAPACITY", rule: "must be a whole number of reviews from 1 to 100000 (the variable is not set)" }]);
  });

  test("cuts a long value in the error to 32 characters", () => {
    const error = configError(() => readSettings({ REFIT_AFTER_DAYS: "9".repeat(40) }, ["REFIT_AFTER_DAYS"]));
    expect(error.problems[0].rule).toContain(`(received "${"9".repeat(32)}…")`);
  });
});
