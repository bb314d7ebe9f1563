import chisquareCdf from "@stdlib/stats-base-dists-chisquare-cdf";
import { describe, expect, test } from "vitest";
import { auditPosition, isAudited } from "./audit-sample";

/** Exact binomial quantiles: the smallest k with P(X ≤ k) ≥ q, from the pmf recursion in logs. */
function binomialQuantiles(n: number, p: number, qs: number[]): number[] {
  let logPmf = n * Math.log1p(-p);
  let cdf = 0;
  const out: number[] = new Array(qs.length).fill(NaN);
  for (let k = 0; k <= n; k++) {
    cdf += Math.exp(logPmf);
    qs.forEach((q, i) => {
      if (Number.isNaN(out[i]) && cdf >= q) out[i] = k;
    });
    if (out.every((v) => !Number.isNaN(v))) break;
    logPmf += Math.log((n - k) / (k + 1)) + Math.log(p / (1 - p));
  }
  return out;
}

/** Invented order ids in the style a payment flow might send. */
const ids = Array.from({ length: 100_000 }, (_, i) => `ord-2026-${String(i).padStart(7, "0")}`);
let positions: number[] | undefined;
async function allPositions(): Promise<number[]> {
  positions ??= await Promise.all(ids.map((id) => auditPosition(id)));
  return positions;
}

describe("auditPosition", () => {
  test("takes the first 52 bits of SHA-256: for 'abc' the digest of FIPS 180-2 Appendix B.1 (ba7816bf 8f01cfea …)", async () => {
    // Digest bytes ba 78 16 bf | 8f 01 c(f): 52 bits = 0xba7816bf8f01c.
    expect(await auditPosition("abc")).toBe(0xba7816bf8f01c / 2 ** 52);
  });

  test("is the same on every call and lies in [0, 1)", async () => {
    const a = await auditPosition("ord-2026-0000042");
    expect(await auditPosition("ord-2026-0000042")).toBe(a);
    for (const p of (await allPositions()).slice(0, 1000)) {
      expect(p).toBeGreaterThanOrEqual(0);
      expect(p).toBeLessThan(1);
    }
  });

  test("spreads 100,000 ids evenly over 20 bins (χ² goodness of fit, p > 0.001 by @stdlib's χ² CDF)", async () => {
    const bins = new Array(20).fill(0);
    for (const p of await allPositions()) bins[Math.floor(p * 20)]++;
    const expected = ids.length / 20;
    const statistic = bins.reduce((s, o) => s + (o - expected) ** 2 / expected, 0);
    const pValue = 1 - chisquareCdf(statistic, 19);
    expect(pValue, `χ² = ${statistic}`).toBeGreaterThan(0.001);
  });
});

describe("isAudited", () => {
  for (const rate of [0.002, 0.05]) {
    test(`draws a count of 100,000 ids inside the binomial 99.9 % bounds at rate ${rate}`, async () => {
      const drawn = (await allPositions()).filter((p) => isAudited(p, rate)).length;
      const [low, high] = binomialQuantiles(ids.length, rate, [0.0005, 0.9995]);
      expect(drawn, `drawn ${drawn}, bounds [${low}, ${high}]`).toBeGreaterThanOrEqual(low);
      expect(drawn, `drawn ${drawn}, bounds [${low}, ${high}]`).toBeLessThanOrEqual(high);
    });
  }

  test("draws nothing at rate 0 and everything at rate 1", async () => {
    const all = await allPositions();
    expect(all.filter((p) => isAudited(p, 0)).length).toBe(0);
    expect(all.filter((p) => isAudited(p, 1)).length).toBe(all.length);
  });

  test("computes bounds that match the normal approximation for n = 100,000, p = 0.002 (≈ 200 ± 3.29 · 14.1)", () => {
    const [low, high] = binomialQuantiles(100_000, 0.002, [0.0005, 0.9995]);
    expect(low).toBeGreaterThanOrEqual(150);
    expect(low).toBeLessThanOrEqual(160);
    expect(high).toBeGreaterThanOrEqual(243);
    expect(high).toBeLessThanOrEqual(250);
  });
});
