import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { EstimationInputError, MomentAccumulator } from "./moments";
import { expectRelativelyClose } from "./test-support";
import { readReferenceData } from "../../test/reference-data/files";

const expected = JSON.parse(readReferenceData("expected-values.json"));

/** The four measurements of iris.csv, rows in file order (1-based row r is index r − 1). */
function irisRows(): number[][] {
  const lines = readReferenceData("iris.csv").trim().split("\n").slice(1);
  return lines.map((line) => line.split(",").slice(1, 5).map(Number));
}

function accumulate(rows: readonly (readonly number[])[], n: number): MomentAccumulator {
  const acc = new MomentAccumulator(n);
  for (const row of rows) acc.push(row);
  return acc;
}

/** Entry-wise check scaled to the matrix: |a−e| ≤ rel·(|e| + √(C_ii·C_jj)) + a round-off floor. */
function expectMatrixClose(actual: Float64Array, wanted: Float64Array, n: number, rel: number, floor: number, label: string): void {
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) {
      const e = wanted[i * n + j];
      const scale = Math.abs(e) + Math.sqrt(Math.abs(wanted[i * n + i] * wanted[j * n + j]));
      const diff = Math.abs(actual[i * n + j] - e);
      expect(diff, `${label}[${i},${j}]: got ${actual[i * n + j]}, expected ${e}`).toBeLessThanOrEqual(rel * scale + floor);
    }
  }
}

const rowsArbitrary = fc.integer({ min: 1, max: 4 }).chain((n) =>
  fc.record({
    n: fc.constant(n),
    rows: fc.array(fc.array(fc.double({ min: -1e3, max: 1e3, noNaN: true }), { minLength: n, maxLength: n }), { minLength: 2, maxLength: 60 }),
  }),
);

describe("MomentAccumulator", () => {
  it("divides the co-moment by m for the default covariance and by m−1 on request (2×2 worked by hand)", () => {
    // Rows (1,2), (3,4), (5,9): mean (3,5); deviations (−2,−3), (0,−1), (2,4);
    // co-moment [[8, 14], [14, 26]] → ÷3 = [[8/3, 14/3], [14/3, 26/3]], ÷2 = [[4, 7], [7, 13]].
    const acc = accumulate(
      [
        [1, 2],
        [3, 4],
        [5, 9],
      ],
      2,
    );
    expect(acc.count).toBe(3);
    expect(Array.from(acc.mean)).toEqual([3, 5]);
    expect(Array.from(acc.comoment)).toEqual([8, 14, 14, 26]);
    expect(Array.from(acc.covariance())).toEqual([8 / 3, 14 / 3, 14 / 3, 26 / 3]);
    expect(Array.from(acc.covariance("m"))).toEqual([8 / 3, 14 / 3, 14 / 3, 26 / 3]);
    expect(Array.from(acc.covariance("m-1"))).toEqual([4, 7, 7, 13]);
  });

  it("reproduces the NumPy mean and both covariances of iris setosa to 1e-12", () => {
    // Reference: expected-values.json `iris_setosa`, computed with NumPy from Fisher's iris data
    // (Fisher 1936; R datasets::iris) — see reference-data/SOURCES.md §4 and §6.
    const acc = accumulate(irisRows().slice(0, 50), 4);
    expect(acc.count).toBe(50);
    expectRelativelyClose(acc.mean, expected.iris_setosa.mean, 1e-12, "setosa mean");
    expectRelativelyClose(acc.covariance("m"), expected.iris_setosa.cov_mle.flat(), 1e-12, "setosa cov_mle");
    expectRelativelyClose(acc.covariance("m-1"), expected.iris_setosa.cov_unbiased.flat(), 1e-12, "setosa cov_unbiased");
  });

  it("reproduces the NumPy mean and both covariances of all 150 iris rows to 1e-12", () => {
    // Reference: expected-values.json `iris_all_150` (NumPy), SOURCES.md §6.
    const acc = accumulate(irisRows(), 4);
    expectRelativelyClose(acc.mean, expected.iris_all_150.mean, 1e-12, "iris mean");
    expectRelativelyClose(acc.covariance("m"), expected.iris_all_150.cov_mle.flat(), 1e-12, "iris cov_mle");
    expectRelativelyClose(acc.covariance("m-1"), expected.iris_all_150.cov_unbiased.flat(), 1e-12, "iris cov_unbiased");
  });

  it("gives the same moments when the three species are accumulated as shards and merged", () => {
    const rows = irisRows();
    const merged = accumulate(rows.slice(0, 50), 4)
      .merge(accumulate(rows.slice(50, 100), 4))
      .merge(accumulate(rows.slice(100), 4));
    expectRelativelyClose(merged.mean, expected.iris_all_150.mean, 1e-12, "merged mean");
    expectRelativelyClose(merged.covariance("m"), expected.iris_all_150.cov_mle.flat(), 1e-12, "merged cov_mle");
  });

  it("keeps the co-moment exactly symmetric after pushes and merges", () => {
    const rows = irisRows();
    const acc = accumulate(rows.slice(0, 70), 4).merge(accumulate(rows.slice(70), 4));
    for (let i = 0; i < 4; i++) for (let j = 0; j < 4; j++) expect(acc.comoment[i * 4 + j]).toBe(acc.comoment[j * 4 + i]);
  });

  it("merges any split into shards to the single-pass mean and co-moment (property)", () => {
    fc.assert(
      fc.property(rowsArbitrary, fc.array(fc.nat(), { maxLength: 5 }), ({ n, rows }, rawCuts) => {
        const single = accumulate(rows, n);
        const cuts = [...new Set(rawCuts.map((c) => c % (rows.length + 1)))].sort((a, b) => a - b);
        const bounds = [0, ...cuts, rows.length];
        const merged = new MomentAccumulator(n);
        for (let s = 0; s + 1 < bounds.length; s++) merged.merge(accumulate(rows.slice(bounds[s], bounds[s + 1]), n));
        expect(merged.count).toBe(single.count);
        const maxAbs = Math.max(...rows.flat().map(Math.abs));
        // Round-off floor: Welford's deviations carry ~ε·max|x| error, so co-moments ~ m·ε·max|x|².
        // Below the normal range a rounding is off by up to one subnormal step (Number.MIN_VALUE),
        // not by a share of the value: a value of 2.7e-162 squares to 5e-324 or 1e-323.
        const floor = Math.max(1e-12 * rows.length * maxAbs * maxAbs, rows.length * Number.MIN_VALUE);
        for (let i = 0; i < n; i++) {
          expect(Math.abs(merged.mean[i] - single.mean[i])).toBeLessThanOrEqual(1e-9 * Math.abs(single.mean[i]) + 1e-13 * maxAbs);
        }
        expectMatrixClose(merged.comoment, single.comoment, n, 1e-9, floor, "merged comoment");
      }),
      // The example is the case a CI run found (fast-check seed -478042263), kept as a regression.
      { numRuns: 200, examples: [[{ n: 1, rows: [[0], [2.722312378772631e-162], [0], [0], [0], [0]] }, [1342272815]]] },
    );
  });

  it("gives the same covariance whatever the order of the rows (property)", () => {
    fc.assert(
      fc.property(rowsArbitrary, fc.integer(), ({ n, rows }, seed) => {
        const shuffled = [...rows];
        let state = seed >>> 0;
        for (let i = shuffled.length - 1; i > 0; i--) {
          state = (Math.imul(state, 1664525) + 1013904223) >>> 0;
          const j = state % (i + 1);
          [shuffled[i], shuffled[j]] = [shuffled[j], shuffled[i]];
        }
        const maxAbs = Math.max(...rows.flat().map(Math.abs));
        const floor = 1e-12 * maxAbs * maxAbs;
        expectMatrixClose(accumulate(shuffled, n).covariance(), accumulate(rows, n).covariance(), n, 1e-9, floor, "shuffled covariance");
      }),
      { numRuns: 200 },
    );
  });

  it("accepts row-major blocks through pushRows with the same result as row-by-row pushes", () => {
    const rows = irisRows().slice(0, 50);
    const block = new MomentAccumulator(4).pushRows(Float64Array.from(rows.flat()), 50);
    const single = accumulate(rows, 4);
    expect(Array.from(block.comoment)).toEqual(Array.from(single.comoment));
    expect(Array.from(block.mean)).toEqual(Array.from(single.mean));
  });

  it("merging an empty shard changes nothing, and merging into an empty one copies the other", () => {
    const rows = irisRows().slice(0, 10);
    const full = accumulate(rows, 4);
    const before = full.toJSON();
    full.merge(new MomentAccumulator(4));
    expect(full.toJSON()).toEqual(before);
    const empty = new MomentAccumulator(4).merge(full);
    expect(empty.toJSON()).toEqual(before);
  });

  it("merging an accumulator with itself doubles the count and keeps the covariance", () => {
    const acc = accumulate(
      [
        [1, 2],
        [3, 4],
        [5, 9],
      ],
      2,
    );
    acc.merge(acc);
    expect(acc.count).toBe(6);
    expect(Array.from(acc.mean)).toEqual([3, 5]);
    expect(Array.from(acc.covariance("m"))).toEqual([8 / 3, 14 / 3, 14 / 3, 26 / 3]);
  });

  it("round-trips through JSON and keeps accumulating as if never stored", () => {
    const rows = irisRows();
    const stored = JSON.stringify(accumulate(rows.slice(0, 80), 4));
    const restored = MomentAccumulator.fromJSON(JSON.parse(stored));
    for (const row of rows.slice(80)) restored.push(row);
    const single = accumulate(rows, 4);
    expect(Array.from(restored.comoment)).toEqual(Array.from(single.comoment));
    expect(Array.from(restored.mean)).toEqual(Array.from(single.mean));
    expect(restored.count).toBe(150);
  });

  it("refuses a row of the wrong length, naming the field and both lengths", () => {
    const acc = new MomentAccumulator(3);
    expect(() => acc.push([1, 2])).toThrowError(/^x: must have one value per column\. Expected: 3\. Actual: 2\.$/);
  });

  it("refuses a non-finite value without changing the accumulator", () => {
    const acc = accumulate(
      [
        [1, 2],
        [3, 4],
      ],
      2,
    );
    const before = acc.toJSON();
    expect(() => acc.push([5, Number.NaN])).toThrowError(/x\[1\]: must be a finite number/);
    expect(() => acc.pushRows(Float64Array.of(1, 2, Number.POSITIVE_INFINITY, 4), 2)).toThrowError(/rows\[2\] \(row 1, column 0\): must be a finite number/);
    // pushRows applies the rows before the bad one; the bad row itself leaves no trace.
    expect(acc.count).toBe(before.count + 1);
  });

  it("refuses a column count below 1 and a block whose length is not m × n", () => {
    expect(() => new MomentAccumulator(0)).toThrowError(EstimationInputError);
    expect(() => new MomentAccumulator(2.5)).toThrowError(/^n: must be an integer ≥ 1/);
    expect(() => new MomentAccumulator(2).pushRows(Float64Array.of(1, 2, 3), 2)).toThrowError(/rows: must hold m × n = 2 × 2 values\. Expected: 4\. Actual: 3\./);
  });

  it("refuses a covariance without enough rows for the denominator, and an unknown denominator", () => {
    expect(() => new MomentAccumulator(2).covariance()).toThrowError(/count: must be ≥ 1 rows for the m denominator/);
    const one = accumulate([[1, 2]], 2);
    expect(Array.from(one.covariance("m"))).toEqual([0, 0, 0, 0]);
    expect(() => one.covariance("m-1")).toThrowError(/count: must be ≥ 2 rows for the m-1 denominator/);
    expect(() => one.covariance("n" as "m")).toThrowError(/denominator: must be "m" or "m-1"/);
  });

  it("refuses to merge accumulators over different numbers of columns", () => {
    expect(() => new MomentAccumulator(2).merge(new MomentAccumulator(3))).toThrowError(/other\.n: must equal this accumulator's column count\. Expected: 2\. Actual: 3\./);
  });

  it("refuses snapshots with a bad field, naming the field and the rule", () => {
    const good = accumulate(
      [
        [1, 2],
        [3, 4],
        [5, 9],
      ],
      2,
    ).toJSON();
    expect(() => MomentAccumulator.fromJSON({ ...good, n: 0 })).toThrowError(/snapshot\.n: must be an integer ≥ 1/);
    expect(() => MomentAccumulator.fromJSON({ ...good, count: -1 })).toThrowError(/snapshot\.count: must be an integer ≥ 0/);
    expect(() => MomentAccumulator.fromJSON({ ...good, mean: [1] })).toThrowError(/snapshot\.mean: must have 2 entries\. Expected: 2\. Actual: 1\./);
    expect(() => MomentAccumulator.fromJSON({ ...good, comoment: [8, 14, 15, 26] })).toThrowError(/snapshot\.comoment: must be symmetric/);
    expect(() => MomentAccumulator.fromJSON({ ...good, comoment: [-8, 14, 14, 26] })).toThrowError(/snapshot\.comoment\[0\]: diagonal entries are sums of squares and must be ≥ 0/);
    expect(() => MomentAccumulator.fromJSON({ ...good, mean: [1, "2"] } as never)).toThrowError(/snapshot\.mean\[1\]: must be a finite number/);
    expect(() => MomentAccumulator.fromJSON(null as never)).toThrowError(/snapshot: must be an object/);
  });
});

describe("pushColumns", () => {
  it("adds a block given column by column exactly as pushing its rows one by one (to 1e-12)", () => {
    const n = 3;
    const m = 257;
    const rows = new Float64Array(m * n);
    for (let k = 0; k < rows.length; k++) rows[k] = Math.sin(k * 1.7) * 100 + (k % n) * 1e4;
    const columns = Array.from({ length: n }, (_, i) => Float64Array.from({ length: m }, (_, r) => rows[r * n + i]));
    const byRows = new MomentAccumulator(n).pushRows(rows.subarray(0, 10 * n), 10).pushRows(rows.subarray(10 * n), m - 10);
    const byColumns = new MomentAccumulator(n).pushRows(rows.subarray(0, 10 * n), 10).pushColumns(
      columns.map((c) => c.subarray(10)),
      m - 10,
    );
    expect(byColumns.count).toBe(m);
    for (let i = 0; i < n; i++) expect(Math.abs(byColumns.mean[i] - byRows.mean[i]) / Math.abs(byRows.mean[i])).toBeLessThan(1e-12);
    for (let k = 0; k < n * n; k++) expect(Math.abs(byColumns.comoment[k] - byRows.comoment[k]) / byRows.comoment[0]).toBeLessThan(1e-12);
  });
});
