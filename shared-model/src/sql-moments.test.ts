import { describe, expect, test } from "vitest";
import { fitted } from "./test-support";
import { momentsQuery, sampleQuery, transformSql, SqlRequestError } from "./sql-moments";

const base = { source: "payments", labelColumn: "label", segmentBy: null, dialect: "postgres" as const };

describe("SQL text for the moments and the sample", () => {
  test("a Yeo–Johnson feature without its fitted λ is refused, naming the feature", () => {
    expect(() => momentsQuery({ ...base, features: [{ name: "amount", transform: "yeo-johnson", columns: ["amount"] }] })).toThrow(SqlRequestError);
    expect(() => momentsQuery({ ...base, features: [{ name: "amount", transform: "yeo-johnson", columns: ["amount"] }] })).toThrow(/amount/);
  });

  test("parameters are written as text cast to a double, so every engine reads the same binary64 value", () => {
    const [expr] = transformSql(fitted("amount", "yeo-johnson", 0.1 + 0.2), "v", "postgres");
    expect(expr).toContain(`CAST('${String(0.1 + 0.2)}' AS DOUBLE PRECISION)`);
    expect(transformSql(fitted("hour", "cyclic-hour"), "v", "duckdb")[0]).toContain(`CAST('${String((2 * Math.PI) / 24)}' AS DOUBLE)`);
  });

  test("identifiers are quoted with doubled quotes inside, so a column name cannot end the identifier", () => {
    const sql = momentsQuery({ ...base, features: [fitted('am"ount', "none")] });
    expect(sql).toContain('CAST("am""ount" AS DOUBLE PRECISION)');
  });

  test("the ANSI sample needs a percent and a table, since TABLESAMPLE applies to a table", () => {
    const features = [fitted("amount", "log")];
    expect(() => sampleQuery({ ...base, dialect: "ansi", features, rows: 10, seed: 1 })).toThrow(/percent/);
    expect(() => sampleQuery({ ...base, dialect: "ansi", features, rows: 10, seed: 1, percent: 5, source: "(SELECT * FROM p)" })).toThrow(/table/);
    expect(sampleQuery({ ...base, dialect: "ansi", features, rows: 10, seed: 1, percent: 5 })).toContain("payments TABLESAMPLE BERNOULLI (5)");
  });
});
