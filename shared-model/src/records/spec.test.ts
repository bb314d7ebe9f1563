import { describe, expect, it } from "vitest";
import { FeatureSpecError } from "../features";
import { DAY_MS, HOUR_MS } from "./time";
import { historyHorizonMs, parseRecordSpec, recordSpecJson } from "./spec";

const RECORD = { id: "paymentId", time: "createdAt", account: "accountRef", segment: "channel" };

function problemsOf(json: unknown): { field: string; rule: string }[] {
  try {
    parseRecordSpec(json);
  } catch (err) {
    if (err instanceof FeatureSpecError) return err.problems;
    throw err;
  }
  throw new Error("the spec was accepted");
}

describe("parseRecordSpec", () => {
  it("reads every derivation key into its derivation", () => {
    const spec = parseRecordSpec({
      record: RECORD,
      features: [
        { name: "amount", transform: "log" },
        { name: "total", transform: "log", column: "amount" },
        { name: "shippingShare", transform: "yeo-johnson", ratio: ["shipping", "amount"] },
        { name: "accountAgeDays", transform: "log1p", since: { column: "accountCreatedAt", unit: "days" } },
        { name: "paymentsLast24h", transform: "log1p", count: { within: "24h" } },
        { name: "spent7d", transform: "log1p", sum: { column: "amount", within: "7d" } },
        { name: "addresses30d", transform: "log1p", distinct: { column: "shipTo", within: "30d" } },
        { name: "hoursSincePrevious", transform: "log1p", sincePrevious: { unit: "hours", none: 8760 } },
        { name: "amountVsAccountAverage", transform: "log", vsMean: { column: "amount", none: 1 } },
        { name: "hourOfDay", transform: "cyclic-hour", hourOfDay: { utcOffset: "+01:00" } },
        { name: "hourBerlin", transform: "cyclic-hour", hourOfDay: { timeZone: "Europe/Berlin" } },
      ],
    });
    expect(spec.record).toEqual(RECORD);
    expect(spec.features.map((f) => f.derivation)).toEqual([
      { kind: "read", column: "amount" },
      { kind: "read", column: "amount" },
      { kind: "ratio", numerator: "shipping", denominator: "amount" },
      { kind: "since", column: "accountCreatedAt", unitMs: DAY_MS },
      { kind: "count", withinMs: DAY_MS },
      { kind: "sum", column: "amount", withinMs: 7 * DAY_MS },
      { kind: "distinct", column: "shipTo", withinMs: 30 * DAY_MS },
      { kind: "sincePrevious", unitMs: HOUR_MS, none: 8760 },
      { kind: "vsMean", column: "amount", none: 1 },
      { kind: "hourOfDay", utcOffsetMinutes: 60 },
      { kind: "hourOfDay", timeZone: "Europe/Berlin" },
    ]);
    // Lateness defaults to 1 h; retention to 30 d, and never less than the longest window.
    expect(spec.latenessMs).toBe(HOUR_MS);
    expect(historyHorizonMs(spec)).toBe(30 * DAY_MS);
  });

  it("accepts the plain feature spec unchanged: each feature reads the column of its name", () => {
    const spec = parseRecordSpec({ features: [{ name: "amount", transform: "log" }] });
    expect(spec.record).toBeUndefined();
    expect(spec.features).toEqual([{ name: "amount", transform: "log", derivation: { kind: "read", column: "amount" } }]);
  });

  it("takes lateness and retention from record; retention never shorter than the longest window", () => {
    const spec = parseRecordSpec({
      record: { ...RECORD, lateness: "15m", retention: "1d" },
      features: [{ name: "n", transform: "none", count: { within: "7d" } }],
    });
    expect(spec.latenessMs).toBe(15 * 60_000);
    expect(spec.retentionMs).toBe(7 * DAY_MS);
    expect(parseRecordSpec({ record: { ...RECORD, retention: "400d" }, features: [{ name: "n", transform: "none", count: { within: "7d" } }] }).retentionMs).toBe(400 * DAY_MS);
  });

  it("names the feature and the key of a bad window, unit, offset or zone", () => {
    const problems = problemsOf({
      record: RECORD,
      features: [
        { name: "paymentsLast24h", transform: "log1p", count: { within: "1 day" } },
        { name: "gap", transform: "log1p", sincePrevious: { unit: "weeks", none: 1 } },
        { name: "hour", transform: "cyclic-hour", hourOfDay: { utcOffset: "+25:00" } },
        { name: "hourZ", transform: "cyclic-hour", hourOfDay: { timeZone: "Mars/Olympus_Mons" } },
      ],
    });
    expect(problems).toEqual([
      { field: "features[0].count.within", rule: expect.stringMatching(/^must be a duration.*; got "1 day" \(feature "paymentsLast24h"\)$/) },
      { field: "features[1].sincePrevious.unit", rule: 'must be one of seconds, minutes, hours, days; got "weeks" (feature "gap")' },
      { field: "features[2].hourOfDay.utcOffset", rule: expect.stringContaining('(feature "hour")') },
      { field: "features[3].hourOfDay.timeZone", rule: expect.stringContaining("must be an IANA time zone this runtime knows") },
    ]);
  });

  it("refuses two derivation keys on one feature, naming the second", () => {
    expect(problemsOf({ record: RECORD, features: [{ name: "x", transform: "none", column: "a", count: { within: "1h" } }] })).toEqual([
      { field: "features[0].count", rule: 'must not be given with column: a feature takes at most one derivation key (feature "x")' },
    ]);
  });

  it("refuses a derivation key without record", () => {
    expect(problemsOf({ features: [{ name: "n", transform: "none", count: { within: "1h" } }] })[0]).toEqual({
      field: "features[0].count",
      rule: `needs the spec's top-level "record" (its id, time and account columns); got nothing (feature "n")`,
    });
    expect(problemsOf({ features: [{ name: "share", transform: "none", ratio: ["fee", "total"] }] })[0].field).toBe("features[0].ratio");
  });

  it("refuses unknown keys, listing the keys allowed there", () => {
    const problems = problemsOf({ record: { ...RECORD, tz: "x" }, features: [{ name: "n", transform: "none", count: { within: "1h", by: "x" } }] });
    expect(problems.map((p) => p.field)).toEqual(["record.tz", "features[0].count.by"]);
    expect(problems[0].rule).toContain("allowed: id, time, account, segment, lateness, retention");
    expect(problems[1].rule).toContain('(allowed: within); got "x" (feature "n")');
  });

  it("refuses a record without its time column, an empty ratio pair and hourOfDay with both or neither key", () => {
    const problems = problemsOf({
      record: { id: "id", account: "a" },
      features: [
        { name: "r", transform: "none", ratio: ["fee"] },
        { name: "h", transform: "cyclic-hour", hourOfDay: { utcOffset: "+01:00", timeZone: "UTC" } },
        { name: "h2", transform: "cyclic-hour", hourOfDay: {} },
      ],
    });
    expect(problems.map((p) => p.field)).toEqual(["record.time", "features[0].ratio", "features[1].hourOfDay", "features[2].hourOfDay"]);
    expect(problems[0].rule).toBe("is required");
  });

  it("keeps the feature spec's own rules: duplicate names and bad transforms", () => {
    const problems = problemsOf({
      record: RECORD,
      features: [
        { name: "a", transform: "log" },
        { name: "a", transform: "sqrt" },
      ],
    });
    expect(problems.map((p) => p.field)).toEqual(["features[1].transform"]);
    expect(
      problemsOf({
        record: RECORD,
        features: [
          { name: "a", transform: "log" },
          { name: "a", transform: "none", count: { within: "1h" } },
        ],
      })[0],
    ).toMatchObject({
      field: "features[1].name",
      rule: expect.stringContaining("must be unique"),
    });
  });

  it("writes a spec back to JSON that parses to the same spec", () => {
    const json = {
      record: { ...RECORD, lateness: "90m", retention: "365d" },
      features: [
        { name: "amount", transform: "log" },
        { name: "n", transform: "log1p", count: { within: "24h" } },
        { name: "s", transform: "log1p", sum: { column: "amount", within: "168h" } },
        { name: "h", transform: "cyclic-hour", hourOfDay: { utcOffset: "-03:30" } },
        { name: "g", transform: "log1p", sincePrevious: { unit: "minutes", none: 0 } },
      ],
    };
    const spec = parseRecordSpec(json);
    const written = recordSpecJson(spec);
    expect(written.record).toEqual({ ...RECORD, lateness: "90m", retention: "365d" });
    expect(written.features[1]).toEqual({ name: "n", transform: "log1p", count: { within: "1d" } });
    expect(parseRecordSpec(written)).toEqual(spec);
  });
});
