import { describe, expect, it } from "vitest";
import { ConfigError } from "../env";
import { readLoopSettings } from "./settings";

describe("readLoopSettings", () => {
  it("uses the defaults when the variables are not set", () => {
    expect(readLoopSettings({})).toEqual({ flushEveryPayments: 500, flushAfterMs: 30_000, refitAfterDays: 28 });
  });

  it("reads the variables in their units", () => {
    expect(readLoopSettings({ DRIFT_FLUSH_PAYMENTS: "100", DRIFT_FLUSH_SECONDS: "5", REFIT_AFTER_DAYS: "14" })).toEqual({ flushEveryPayments: 100, flushAfterMs: 5000, refitAfterDays: 14 });
  });

  it("names every malformed variable and the rule it broke", () => {
    try {
      readLoopSettings({ DRIFT_FLUSH_PAYMENTS: "0", DRIFT_FLUSH_SECONDS: "ten", REFIT_AFTER_DAYS: "-3" });
      expect.unreachable();
    } catch (error) {
      expect(error).toBeInstanceOf(ConfigError);
      expect((error as ConfigError).problems.map((p) => p.field)).toEqual(["DRIFT_FLUSH_PAYMENTS", "DRIFT_FLUSH_SECONDS", "REFIT_AFTER_DAYS"]);
      expect((error as ConfigError).problems[1].rule).toContain('received "ten"');
    }
  });
});
