import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { diagnoseColumns, diagnoseCovariance, diagnoseRowCount, FitRefusal, refuseIfErrors } from "./diagnostics";
import { MomentAccumulator } from "./moments";
import { mulberry32 } from "./seeded-stream";
import type { Diagnostic } from "./types";

/** Moments of generated rows. */
function momentsOf(m: number, n: number, row: (r: number) => number[]): MomentAccumulator {
  const acc = new MomentAccumulator(n);
  for (let r = 0; r < m; r++) acc.push(row(r));
  return acc;
}

function dependencies(diagnostics: Diagnostic[]): Diagnostic[] {
  return diagnostics.filter((d) => d.code === "linear-dependency");
}

/** Reads "s ≈ 2.00·a − 1.00·b + 3.00" back into { subject, terms, constant }. */
function parseEquation(equation: string): { subject: string; terms: Map<string, number>; constant: number } {
  const [subject, rhs] = equation.split(" ≈ ");
  const terms = new Map<string, number>();
  let constant = 0;
  const normalised = rhs.replace(/^−/, "-").replace(/ − /g, " + -");
  for (const part of normalised.split(" + ")) {
    const [coef, name] = part.split("·");
    if (name === undefined) constant += Number(coef);
    else terms.set(name, Number(coef));
  }
  return { subject, terms, constant };
}

/** Standard deviation (÷m) of a sample. */
function spreadOf(values: number[]): number {
  const mean = values.reduce((a, b) => a + b, 0) / values.length;
  return Math.sqrt(values.reduce((a, v) => a + (v - mean) ** 2, 0) / values.length);
}

/** Largest |subject − rhs| over the rows, relative to the subject's spread. */
function equationMisfit(equation: string, columns: string[], data: number[][]): number {
  const { subject, terms, constant } = parseEquation(equation);
  const s = columns.indexOf(subject);
  const values = data.map((row) => row[s]);
  const mean = values.reduce((a, b) => a + b, 0) / values.length;
  const spread = Math.sqrt(values.reduce((a, v) => a + (v - mean) ** 2, 0) / values.length);
  let worst = 0;
  for (const row of data) {
    let rhs = constant;
    for (const [name, coef] of terms) rhs += coef * row[columns.indexOf(name)];
    worst = Math.max(worst, Math.abs(row[s] - rhs));
  }
  return worst / spread;
}

/** Invented checkout data: subtotal, shipping fee, total = subtotal + shipping, items, account age in days. */
function checkoutRows(m: number, seed: number): number[][] {
  const { normal, uniform } = mulberry32(seed);
  return Array.from({ length: m }, () => {
    const subtotal = Math.round(Math.exp(3.8 + 0.7 * normal()) * 100) / 100;
    const shipping = [0, 4.95, 9.9, 14.5][Math.floor(uniform() * 4)];
    const items = 1 + Math.floor(uniform() * 6);
    const ageDays = Math.round(30 + 400 * uniform());
    return [subtotal, shipping, subtotal + shipping, items, ageDays];
  });
}

describe("diagnoseRowCount", () => {
  it("refuses a full covariance with fewer than n+1 rows, giving the numbers and the way out", () => {
    const [d] = diagnoseRowCount(7, 8, "full");
    expect(d).toMatchObject({ code: "too-few-rows", severity: "error" });
    expect(d.message).toBe("7 rows for 8 columns: a full covariance needs at least 9 rows (n+1); use --covariance diagonal or more data");
    expect(d.remedy).toContain("--covariance diagonal");
    expect(() => refuseIfErrors(diagnoseRowCount(7, 8, "full"))).toThrowError(/7 rows for 8 columns: a full covariance needs at least 9 rows/);
  });

  it("accepts exactly n+1 rows for full but warns below 10 rows per column", () => {
    const [d] = diagnoseRowCount(9, 8, "full");
    expect(d).toMatchObject({ code: "few-rows", severity: "warning" });
    expect(d.message).toBe("9 rows for 8 columns: below the 80 rows (10 per column) a full covariance is usually fitted on; its 36 entries will be noisy");
    expect(d.remedy).toContain("--estimator shrinkage");
    expect(diagnoseRowCount(79, 8, "full")[0].severity).toBe("warning");
    expect(diagnoseRowCount(80, 8, "full")).toEqual([]);
  });

  it("needs two rows for a diagonal covariance and nothing more", () => {
    expect(diagnoseRowCount(1, 8, "diagonal")).toEqual([
      {
        code: "too-few-rows",
        severity: "error",
        message: "1 row for 8 columns: a diagonal covariance needs at least 2 rows to estimate a variance",
        remedy: "fit on more data",
      },
    ]);
    expect(diagnoseRowCount(2, 8, "diagonal")).toEqual([]);
  });

  it("refuses impossible arguments, naming them", () => {
    expect(() => diagnoseRowCount(-3, 2, "full")).toThrowError(/^rows: must be an integer ≥ 0/);
    expect(() => diagnoseRowCount(3, 0, "full")).toThrowError(/^n: must be an integer ≥ 1/);
    expect(() => diagnoseRowCount(3, 2, "banded" as "full")).toThrowError(/^shape: must be "full" or "diagonal"/);
  });
});

describe("diagnoseColumns", () => {
  it("names a constant column with its value and the remedy to drop the feature", () => {
    const { normal } = mulberry32(11);
    const acc = momentsOf(50, 3, () => [normal(), 840, normal()]);
    const found = diagnoseColumns(acc, ["amount_log", "currency_code", "items"]);
    expect(found).toEqual([
      {
        code: "constant-column",
        severity: "error",
        message: "column currency_code is constant (840 in all 50 rows): its variance is zero, so it carries no evidence and the covariance cannot be inverted",
        columns: ["currency_code"],
        remedy: "drop the feature that produces currency_code from the feature list",
      },
    ]);
  });

  it("names every constant column and nothing else", () => {
    const { normal } = mulberry32(12);
    const acc = momentsOf(30, 4, () => [0, normal(), -2.5, normal()]);
    expect(diagnoseColumns(acc, ["a", "b", "c", "d"]).map((d) => d.columns)).toEqual([["a"], ["c"]]);
    const varied = momentsOf(30, 2, () => [normal(), normal()]);
    expect(diagnoseColumns(varied, ["a", "b"])).toEqual([]);
  });

  it("says nothing about variances with fewer than two rows (the row-count check covers that)", () => {
    expect(
      diagnoseColumns(
        momentsOf(1, 2, () => [1, 2]),
        ["a", "b"],
      ),
    ).toEqual([]);
  });

  it("refuses a name list that does not match the columns", () => {
    expect(() => diagnoseColumns(new MomentAccumulator(3), ["a", "b"])).toThrowError(/^columns: must name every model column.*Expected: 3\. Actual: 2\./);
    expect(() => diagnoseColumns(new MomentAccumulator(2), ["a", ""])).toThrowError(/^columns\[1\]: must be a non-empty string/);
  });
});

describe("diagnoseCovariance", () => {
  it("reports the condition number λmax/λmin as information when the covariance is well conditioned", () => {
    // [[2, 1], [1, 2]] has eigenvalues 3 and 1.
    const { conditionNumber, diagnostics } = diagnoseCovariance(Float64Array.of(2, 1, 1, 2), 2, ["a", "b"]);
    expect(conditionNumber).toBeCloseTo(3, 12);
    expect(diagnostics).toHaveLength(1);
    expect(diagnostics[0]).toMatchObject({ code: "condition-number", severity: "info" });
    expect(diagnostics[0].message).toBe("condition number 3 (largest / smallest eigenvalue of the covariance: 3 / 1); 3 once every column is scaled to unit variance");
  });

  it("warns above 1e10 and, when only the units differ, suggests a transform instead of calling it a dependency", () => {
    const { normal } = mulberry32(21);
    // Seconds since the previous payment (spread ~1e6) beside a shipping share (spread ~1e-2).
    const acc = momentsOf(500, 2, () => [3e6 + 1e6 * normal(), 0.1 + 0.01 * normal()]);
    const { conditionNumber, diagnostics } = diagnoseCovariance(acc.covariance(), 2, ["gap_seconds", "shipping_share"], { mean: acc.mean });
    expect(conditionNumber).toBeGreaterThan(1e10);
    expect(dependencies(diagnostics)).toEqual([]);
    const d = diagnostics.find((x) => x.code === "condition-number");
    expect(d?.severity).toBe("warning");
    expect(d?.remedy).toContain("log or log1p");
    expect(diagnostics.some((x) => x.code === "singular-covariance")).toBe(false);
  });

  it("gives an infinite condition number when the smallest eigenvalue is not positive", () => {
    const { conditionNumber } = diagnoseCovariance(Float64Array.of(1, 1, 1, 1), 2, ["a", "b"]);
    expect(conditionNumber).toBe(Number.POSITIVE_INFINITY);
  });

  it("names total ≈ 1.00·subtotal + 1.00·shipping and refuses the full fit with both remedies", () => {
    const columns = ["subtotal", "shipping", "total", "items", "account_age_days"];
    const rows = checkoutRows(400, 7);
    const acc = momentsOf(rows.length, 5, (r) => rows[r]);
    const { diagnostics } = diagnoseCovariance(acc.covariance(), 5, columns, { mean: acc.mean, rows: acc.count });
    const [dep, ...others] = dependencies(diagnostics);
    expect(others).toEqual([]);
    expect(dep.equation).toBe("total ≈ 1.00·subtotal + 1.00·shipping");
    expect(dep.severity).toBe("error");
    expect(dep.columns).toEqual(["total", "subtotal", "shipping"]);
    expect(dep.remedy).toBe("drop one of total, subtotal and shipping from the features, or use --estimator shrinkage");
    const singular = diagnostics.find((d) => d.code === "singular-covariance");
    expect(singular?.severity).toBe("error");
    expect(singular?.message).toContain("total ≈ 1.00·subtotal + 1.00·shipping");
    expect(singular?.remedy).toContain("--estimator shrinkage");
    expect(() => refuseIfErrors(diagnostics)).toThrowError(FitRefusal);
  });

  it("names the planted column c = 2·a − b + 3 with its intercept", () => {
    const { normal } = mulberry32(5);
    const rows = Array.from({ length: 300 }, () => {
      const a = 10 + 2 * normal();
      const b = 4 + 2 * normal();
      return [a, b, 2 * a - b + 3, normal()];
    });
    const acc = momentsOf(rows.length, 4, (r) => rows[r]);
    const deps = dependencies(diagnoseCovariance(acc.covariance(), 4, ["a", "b", "c", "d"], { mean: acc.mean }).diagnostics);
    expect(deps.map((d) => d.equation)).toEqual(["c ≈ 2.00·a − 1.00·b + 3.00"]);
  });

  it("finds a planted dependency whatever the columns' scales and reads back an equation that holds (property)", () => {
    fc.assert(
      fc.property(
        fc.integer(),
        fc.integer({ min: 8, max: 120 }),
        fc.double({ min: -3, max: 3, noNaN: true }),
        fc.double({ min: -3, max: 3, noNaN: true }),
        (seed, m, logScaleA, logScaleB) => {
          const { normal } = mulberry32(seed);
          const sa = 10 ** logScaleA;
          const sb = 10 ** logScaleB;
          const data = Array.from({ length: m }, () => {
            const a = 5 * sa + sa * normal();
            const b = sb * normal();
            return [a, b, normal(), 2 * a - b + 3];
          });
          const columns = ["a", "b", "noise", "c"];
          const acc = momentsOf(m, 4, (r) => data[r]);
          const deps = dependencies(diagnoseCovariance(acc.covariance(), 4, columns, { mean: acc.mean, rows: m }).diagnostics);
          expect(deps).toHaveLength(1);
          const equation = deps[0].equation ?? "";
          expect(new Set(deps[0].columns)).toEqual(new Set(["a", "b", "c"].filter((c) => equation.includes(c))));
          expect(parseEquation(equation).terms.has("noise")).toBe(false);
          // The read-back equation holds up to what printing does to it: each kept coefficient is
          // rounded to ±0.005 and each dropped term moves the subject by < 0.5 % of its spread.
          const { subject, terms, constant } = parseEquation(equation);
          const sdOf = (name: string) => spreadOf(data.map((row) => row[columns.indexOf(name)]));
          const dropped = 3 - terms.size; // a, b, c and noise minus the subject and the kept terms
          const sdBound = [...terms.keys()].reduce((s, name) => s + 0.005 * sdOf(name), 0) / sdOf(subject) + 0.005 * dropped * 1.0001 + 1e-9;
          const residual = data.map((row) => row[columns.indexOf(subject)] - [...terms].reduce((s, [name, coef]) => s + coef * row[columns.indexOf(name)], constant));
          expect(spreadOf(residual) / sdOf(subject), equation).toBeLessThanOrEqual(sdBound);
          // The intercept is the planted relation's own, solved for the subject:
          // c = 2a − b + 3, b = 2a − c + 3, a = 0.5b + 0.5c − 1.5.
          const plantedConstant: Record<string, number> = { c: 3, b: 3, a: -1.5 };
          expect(Math.abs(constant - plantedConstant[subject]), equation).toBeLessThanOrEqual(0.005 + 1e-9);
        },
      ),
      { numRuns: 150 },
    );
  });

  it("names a copied column as a copy of the earlier one", () => {
    const { normal } = mulberry32(3);
    const rows = Array.from({ length: 100 }, () => {
      const a = 50 + 10 * normal();
      return [a, normal(), a];
    });
    const acc = momentsOf(100, 3, (r) => rows[r]);
    const deps = dependencies(diagnoseCovariance(acc.covariance(), 3, ["amount", "items", "amount_again"], { mean: acc.mean }).diagnostics);
    expect(deps.map((d) => d.equation)).toEqual(["amount_again ≈ 1.00·amount"]);
  });

  it("reports each of several dependencies with its own subject, none mixing in another's columns", () => {
    const columns = ["subtotal", "shipping", "total", "items", "account_age_days", "age_copy"];
    const rows = checkoutRows(300, 9).map((r) => [...r, r[4]]);
    const acc = momentsOf(rows.length, 6, (r) => rows[r]);
    const deps = dependencies(diagnoseCovariance(acc.covariance(), 6, columns, { mean: acc.mean }).diagnostics);
    expect(deps.map((d) => d.equation).sort()).toEqual(["age_copy ≈ 1.00·account_age_days", "total ≈ 1.00·subtotal + 1.00·shipping"]);
  });

  it("gives dependencies that share a column distinct subjects, each equation holding on the data", () => {
    const { normal } = mulberry32(17);
    const columns = ["a", "b", "c", "d"];
    const data = Array.from({ length: 200 }, () => {
      const a = 1 + normal();
      const d = normal();
      return [a, a, 2 * a + d, d];
    });
    const acc = momentsOf(data.length, 4, (r) => data[r]);
    const deps = dependencies(diagnoseCovariance(acc.covariance(), 4, columns, { mean: acc.mean }).diagnostics);
    expect(deps).toHaveLength(2);
    const subjects = deps.map((d) => parseEquation(d.equation ?? "").subject);
    expect(new Set(subjects).size).toBe(2);
    for (const d of deps) {
      const { terms } = parseEquation(d.equation ?? "");
      for (const s of subjects) expect(terms.has(s), `${d.equation} mentions another subject`).toBe(false);
      expect(equationMisfit(d.equation ?? "", columns, data), d.equation).toBeLessThan(1e-9);
    }
  });

  it("leaves the intercept out when no mean is given", () => {
    const { normal } = mulberry32(8);
    const rows = Array.from({ length: 80 }, () => {
      const a = 100 + normal();
      return [a, a + 7];
    });
    const acc = momentsOf(80, 2, (r) => rows[r]);
    const withMean = dependencies(diagnoseCovariance(acc.covariance(), 2, ["a", "b"], { mean: acc.mean }).diagnostics);
    const without = dependencies(diagnoseCovariance(acc.covariance(), 2, ["a", "b"]).diagnostics);
    expect(withMean[0].equation).toBe("b ≈ 1.00·a + 7.00");
    expect(without[0].equation).toBe("b ≈ 1.00·a");
  });

  it("does not call independent columns of very different units dependent", () => {
    const { normal } = mulberry32(4);
    const acc = momentsOf(300, 3, () => [1e5 * normal(), 1e-4 * normal(), normal()]);
    const { diagnostics } = diagnoseCovariance(acc.covariance(), 3, ["cents", "share", "z"], { mean: acc.mean });
    expect(dependencies(diagnostics)).toEqual([]);
    expect(diagnostics.some((d) => d.severity === "error")).toBe(false);
  });

  it("only warns about a dependency when the diagonal shape will be fitted", () => {
    const rows = checkoutRows(200, 2);
    const acc = momentsOf(rows.length, 5, (r) => rows[r]);
    const { diagnostics } = diagnoseCovariance(acc.covariance(), 5, ["subtotal", "shipping", "total", "items", "age"], { mean: acc.mean, shape: "diagonal" });
    const [dep] = dependencies(diagnostics);
    expect(dep.severity).toBe("warning");
    expect(dep.message).toContain("counts this evidence more than once");
    expect(diagnostics.some((d) => d.severity === "error")).toBe(false);
  });

  it("blames too few rows, not the features, when rows < n+1", () => {
    const { normal } = mulberry32(6);
    const acc = momentsOf(4, 6, () => Array.from({ length: 6 }, normal));
    const { diagnostics } = diagnoseCovariance(acc.covariance(), 6, ["a", "b", "c", "d", "e", "f"], { mean: acc.mean, rows: 4 });
    expect(dependencies(diagnostics)).toEqual([]);
    const singular = diagnostics.find((d) => d.code === "singular-covariance");
    expect(singular?.message).toBe("the covariance of 6 columns is singular whatever the data: with 4 rows its rank is at most 3");
    expect(singular?.severity).toBe("error");
  });

  it("counts a constant column toward the singularity without calling it a dependency", () => {
    const { normal } = mulberry32(14);
    const acc = momentsOf(60, 3, () => [normal(), 840, normal()]);
    const { diagnostics, conditionNumber } = diagnoseCovariance(acc.covariance(), 3, ["a", "currency_code", "b"], { mean: acc.mean });
    expect(conditionNumber).toBe(Number.POSITIVE_INFINITY);
    expect(dependencies(diagnostics)).toEqual([]);
    const singular = diagnostics.find((d) => d.code === "singular-covariance");
    expect(singular?.columns).toEqual(["currency_code"]);
    expect(singular?.message).toBe("the covariance of 3 columns is singular: 1 direction with no variance — 1 constant column (currency_code)");
  });

  it("refuses malformed input, naming the field", () => {
    expect(() => diagnoseCovariance(new Float64Array(3), 2, ["a", "b"])).toThrowError(/^covariance: must be a Float64Array of n × n = 2 × 2 values\. Expected: 4\. Actual: 3\./);
    expect(() => diagnoseCovariance(Float64Array.of(1, Number.NaN, 0, 1), 2, ["a", "b"])).toThrowError(/^covariance\[1\]: must be a finite number/);
    expect(() => diagnoseCovariance(Float64Array.of(1, 0, 0, 1), 2, ["a"])).toThrowError(/^columns: must name every model column/);
    expect(() => diagnoseCovariance(Float64Array.of(1, 0, 0, 1), 2, ["a", "b"], { mean: [1] })).toThrowError(/^options\.mean: must have one value per column/);
    expect(() => diagnoseCovariance(Float64Array.of(1, 0, 0, 1), 2, ["a", "b"], { rows: 2.5 })).toThrowError(/^options\.rows: must be an integer ≥ 0/);
  });
});

describe("FitRefusal", () => {
  it("carries every diagnostic, errors first, and lists the errors in its message", () => {
    const warning: Diagnostic = { code: "few-rows", severity: "warning", message: "few rows" };
    const error: Diagnostic = { code: "constant-column", severity: "error", message: "column x is constant" };
    const refusal = new FitRefusal([warning, error]);
    expect(refusal.diagnostics).toEqual([error, warning]);
    expect(refusal.message).toBe("fit refused (1 error): column x is constant");
    expect(refusal).toBeInstanceOf(Error);
    expect(refusal.name).toBe("FitRefusal");
  });

  it("is not thrown by refuseIfErrors when there are only warnings and infos", () => {
    expect(() => refuseIfErrors([{ code: "few-rows", severity: "warning", message: "few rows" }])).not.toThrow();
  });
});
