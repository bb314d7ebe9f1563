import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { normalQuantile } from "./distributions";
import {
  checkRawValue,
  columnsOf,
  FeatureSpecError,
  fitFeatures,
  fitYeoJohnsonLambda,
  hourFromCyclic,
  inverseTransform,
  modelColumns,
  parseFeatureSpec,
  transformInto,
  yeoJohnson,
  yeoJohnsonInverse,
} from "./features";
import { mulberry32 } from "./seeded-stream";
import type { FeatureDeclaration, FittedFeature } from "./types";

/** Invented payment amounts: lognormal with median e^mu, by inverse-CDF sampling. */
function lognormalSample(m: number, mu: number, sigma: number, seed: number): Float64Array {
  const uniform = mulberry32(seed).uniformOpen;
  const out = new Float64Array(m);
  for (let i = 0; i < m; i++) out[i] = Math.exp(mu + sigma * normalQuantile(uniform()));
  return out;
}

function skewness(values: ArrayLike<number>): number {
  const m = values.length;
  let mean = 0;
  for (let i = 0; i < m; i++) mean += values[i] / m;
  let m2 = 0;
  let m3 = 0;
  for (let i = 0; i < m; i++) {
    const d = values[i] - mean;
    m2 += (d * d) / m;
    m3 += (d * d * d) / m;
  }
  return m3 / Math.pow(m2, 1.5);
}

/**
 * The profile log-likelihood of Yeo & Johnson (2000), written directly from the paper's
 * piecewise definition with Math.pow (independent of the module's expm1/log1p form).
 */
function referenceProfileLogLikelihood(values: ArrayLike<number>, lambda: number): number {
  const m = values.length;
  const psi = Array.from(values, (x) => {
    if (x >= 0) return lambda === 0 ? Math.log(x + 1) : (Math.pow(x + 1, lambda) - 1) / lambda;
    return lambda === 2 ? -Math.log(1 - x) : -(Math.pow(1 - x, 2 - lambda) - 1) / (2 - lambda);
  });
  const mean = psi.reduce((s, y) => s + y, 0) / m;
  const variance = psi.reduce((s, y) => s + (y - mean) ** 2, 0) / m;
  const jacobian = Array.from(values).reduce((s, x) => s + Math.sign(x) * Math.log(Math.abs(x) + 1), 0);
  return (-m / 2) * Math.log(variance) + (lambda - 1) * jacobian;
}

/** Dense grid search of the reference likelihood: step 1e-3 over [−5, 5], then 1e-6 around the best. */
function gridSearchLambda(values: ArrayLike<number>): number {
  let best = -5;
  let bestValue = -Infinity;
  for (let k = 0; k <= 10000; k++) {
    const lambda = -5 + k * 1e-3;
    const value = referenceProfileLogLikelihood(values, lambda);
    if (value > bestValue) [best, bestValue] = [lambda, value];
  }
  const center = best;
  for (let k = -1000; k <= 1000; k++) {
    const lambda = center + k * 1e-6;
    const value = referenceProfileLogLikelihood(values, lambda);
    if (value > bestValue) [best, bestValue] = [lambda, value];
  }
  return best;
}

function fitted(name: string, transform: FittedFeature["transform"], lambda?: number): FittedFeature {
  const feature: FittedFeature = { name, transform, columns: columnsOf({ name, transform }) };
  if (lambda !== undefined) feature.lambda = lambda;
  return feature;
}

function specError(json: unknown): FeatureSpecError {
  try {
    parseFeatureSpec(json);
  } catch (error) {
    if (error instanceof FeatureSpecError) return error;
    throw error;
  }
  throw new Error("expected parseFeatureSpec to throw a FeatureSpecError");
}

describe("parseFeatureSpec", () => {
  it("returns the declarations of a valid spec in order", () => {
    const spec = {
      features: [
        { name: "amount", transform: "log" },
        { name: "items", transform: "log1p" },
        { name: "account_age_days", transform: "yeo-johnson" },
        { name: "hour", transform: "cyclic-hour" },
        { name: "shipping_share", transform: "none" },
      ],
    };
    expect(parseFeatureSpec(spec)).toEqual(spec.features);
  });

  it("names the field and the allowed transforms when a transform is unknown", () => {
    const error = specError({
      features: [
        { name: "a", transform: "none" },
        { name: "b", transform: "log" },
        { name: "c", transform: "sqrt" },
      ],
    });
    expect(error.field).toBe("features[2].transform");
    expect(error.rule).toBe('must be one of none, log, log1p, yeo-johnson, cyclic-hour; got "sqrt"');
    expect(error.message).toContain("features[2].transform");
  });

  it("refuses a spec without features, with an empty list, or that is not an object", () => {
    expect(specError({})).toMatchObject({ field: "features", rule: "is required" });
    expect(specError({ features: [] })).toMatchObject({ field: "features", rule: "must list at least one feature; got an array of 0" });
    expect(specError(null)).toMatchObject({ field: "spec", rule: 'must be an object { "features": [ … ] }; got null' });
    expect(specError([{ name: "a", transform: "log" }]).field).toBe("spec");
    expect(specError({ features: "amount" })).toMatchObject({ field: "features", rule: 'must be an array of { "name": …, "transform": … } objects; got "amount"' });
    expect(specError({ features: [null] })).toMatchObject({ field: "features[0]", rule: 'must be an object { "name": …, "transform": … }; got null' });
  });

  it("refuses unknown keys at the top level and inside a feature, naming the key", () => {
    expect(specError({ features: [{ name: "a", transform: "log" }], version: 2 })).toMatchObject({
      field: "version",
      rule: "is not a recognised key (allowed: features); got 2",
    });
    expect(specError({ features: [{ name: "a", transform: "log", lambda: 0.5 }] })).toMatchObject({
      field: "features[0].lambda",
      rule: "is not a recognised key (allowed: name, transform); got 0.5",
    });
  });

  it("enforces the name rules: a non-empty string of at most 64 characters, no comma, no surrounding whitespace", () => {
    const base = (name: unknown) => ({ features: [{ name, transform: "none" }] });
    expect(specError(base("")).rule).toBe('must not be empty; got ""');
    expect(specError(base(7)).rule).toBe("must be a string; got 7");
    expect(specError({ features: [{ transform: "none" }] })).toMatchObject({ field: "features[0].name", rule: "is required" });
    expect(specError(base("a".repeat(65))).rule).toMatch(/^must be at most 64 characters; got "a{65}"$/);
    expect(parseFeatureSpec(base("a".repeat(64)))).toHaveLength(1);
    // 64 characters that are 128 UTF-16 code units still count as 64.
    expect(parseFeatureSpec(base("€".repeat(32) + "😀".repeat(32)))).toHaveLength(1);
    expect(specError(base("amount,items")).rule).toBe('must not contain a comma; got "amount,items"');
    expect(specError(base(" amount")).rule).toBe('must not start or end with whitespace; got " amount"');
  });

  it("refuses duplicate names and names whose model columns collide with a cyclic-hour pair", () => {
    const duplicate = specError({
      features: [
        { name: "amount", transform: "log" },
        { name: "amount", transform: "none" },
      ],
    });
    expect(duplicate.field).toBe("features[1].name");
    expect(duplicate.rule).toContain('must be unique; features[0].name is also "amount"');
    const clash = specError({
      features: [
        { name: "hour", transform: "cyclic-hour" },
        { name: "hour.sin", transform: "none" },
      ],
    });
    expect(clash.field).toBe("features[1].name");
    expect(clash.rule).toContain('model column "hour.sin", which features[0] ("hour") already produces');
  });

  it("lists every problem, in document order, and reports the first as field and rule", () => {
    const error = specError({
      features: [
        { name: "", transform: "sqrt" },
        { name: "b", transform: 3 },
      ],
    });
    expect(error.problems.map((p) => p.field)).toEqual(["features[0].name", "features[0].transform", "features[1].transform"]);
    expect(error.field).toBe("features[0].name");
    expect(error).toBeInstanceOf(Error);
    expect(error.name).toBe("FeatureSpecError");
  });
});

describe("columnsOf and modelColumns", () => {
  it("give one column per feature and a .sin/.cos pair for cyclic-hour, in feature order", () => {
    const decls: FeatureDeclaration[] = [
      { name: "amount", transform: "log" },
      { name: "hour", transform: "cyclic-hour" },
      { name: "items", transform: "log1p" },
    ];
    expect(columnsOf(decls[1])).toEqual(["hour.sin", "hour.cos"]);
    expect(modelColumns(decls)).toEqual(["amount", "hour.sin", "hour.cos", "items"]);
  });
});

describe("checkRawValue", () => {
  it("accepts values inside each transform's domain", () => {
    expect(checkRawValue({ name: "amount", transform: "log" }, 0.01)).toBeNull();
    expect(checkRawValue({ name: "items", transform: "log1p" }, 0)).toBeNull();
    expect(checkRawValue({ name: "items", transform: "log1p" }, -0.5)).toBeNull();
    expect(checkRawValue({ name: "hour", transform: "cyclic-hour" }, 0)).toBeNull();
    expect(checkRawValue({ name: "hour", transform: "cyclic-hour" }, 23.99)).toBeNull();
    expect(checkRawValue({ name: "delta", transform: "yeo-johnson" }, -1e6)).toBeNull();
    expect(checkRawValue({ name: "share", transform: "none" }, -3)).toBeNull();
  });

  it("returns the rule with the value that came when a value is outside the domain", () => {
    expect(checkRawValue({ name: "amount", transform: "log" }, -3)).toBe("must be > 0 for the log transform; got -3");
    expect(checkRawValue({ name: "amount", transform: "log" }, 0)).toBe("must be > 0 for the log transform; got 0");
    expect(checkRawValue({ name: "items", transform: "log1p" }, -1)).toBe("must be > -1 for the log1p transform; got -1");
    expect(checkRawValue({ name: "hour", transform: "cyclic-hour" }, 24)).toBe("must be an hour of day in [0, 24) for the cyclic-hour transform; got 24");
    expect(checkRawValue({ name: "hour", transform: "cyclic-hour" }, -0.5)).toBe("must be an hour of day in [0, 24) for the cyclic-hour transform; got -0.5");
  });

  it("refuses non-finite values under every transform", () => {
    for (const transform of ["none", "log", "log1p", "yeo-johnson", "cyclic-hour"] as const) {
      expect(checkRawValue({ name: "x", transform }, Number.NaN)).toBe("must be a finite number; got NaN");
      expect(checkRawValue({ name: "x", transform }, Infinity)).toBe("must be a finite number; got Infinity");
    }
  });
});

describe("yeoJohnson and yeoJohnsonInverse", () => {
  it("follow the four branches of the definition, including λ = 0 and λ = 2", () => {
    expect(yeoJohnson(3, 0.5)).toBeCloseTo(2, 15); // ((3+1)^0.5 − 1)/0.5
    expect(yeoJohnson(3, 0)).toBe(Math.log(4));
    expect(yeoJohnson(-3, 2)).toBe(-Math.log(4));
    expect(yeoJohnson(-3, 1.5)).toBeCloseTo(-(Math.sqrt(4) - 1) / 0.5, 15); // −((1+3)^{0.5} − 1)/0.5
    expect(yeoJohnson(0, -2)).toBe(0);
    // λ = 1 is the identity on both sides.
    for (const x of [-7.5, -1, 0, 0.25, 12]) expect(yeoJohnson(x, 1)).toBeCloseTo(x, 13);
  });

  it("is continuous in λ across the special values 0 and 2", () => {
    for (const x of [0.5, 3, 250]) expect(yeoJohnson(x, 1e-12)).toBeCloseTo(yeoJohnson(x, 0), 10);
    // Even the smallest subnormal power stays on the logarithm instead of collapsing to 0.
    expect(yeoJohnson(3, 5e-324)).toBe(Math.log(4));
    expect(yeoJohnsonInverse(Math.log(4), 5e-324)).toBeCloseTo(3, 14);
    for (const x of [-0.5, -3, -250]) expect(yeoJohnson(x, 2 - 1e-12)).toBeCloseTo(yeoJohnson(x, 2), 10);
  });

  it("inverts to the original value for arbitrary x and λ away from saturation", () => {
    fc.assert(
      fc.property(fc.double({ min: -1e6, max: 1e6, noNaN: true }), fc.double({ min: -5, max: 5, noNaN: true }), (x, lambda) => {
        // For λ < 0 (x ≥ 0) or λ > 2 (x < 0) ψ flattens towards a bound; beyond e^{−10} of it the
        // inverse is ill-conditioned, which is not what this property is about.
        const exponent = x >= 0 ? lambda * Math.log1p(x) : (2 - lambda) * Math.log1p(-x);
        fc.pre(exponent > -10);
        const back = yeoJohnsonInverse(yeoJohnson(x, lambda), lambda);
        expect(Math.abs(back - x)).toBeLessThanOrEqual(1e-9 * (1 + Math.abs(x)));
      }),
      { numRuns: 2000 },
    );
    for (const lambda of [0, 2]) {
      for (const x of [-20, -1, -1e-9, 0, 1e-9, 1, 20]) expect(yeoJohnsonInverse(yeoJohnson(x, lambda), lambda)).toBeCloseTo(x, 12);
    }
  });

  it("saturates to ±Infinity beyond the transform's range when mapped back", () => {
    expect(yeoJohnsonInverse(0.5, -2)).toBe(Infinity); // range of x ≥ 0 is [0, 1/2) for λ = −2
    expect(yeoJohnsonInverse(0.4999, -2)).toBeCloseTo(Math.sqrt(1 / (1 - 2 * 0.4999)) - 1, 6); // ≈ 69.7
    expect(yeoJohnsonInverse(-0.5, 4)).toBe(-Infinity); // range of x < 0 is (−1/2, 0) for λ = 4
    expect(yeoJohnsonInverse(Infinity, 1)).toBe(Infinity);
  });

  it("rejects non-finite arguments, naming them", () => {
    expect(() => yeoJohnson(Number.NaN, 1)).toThrow("x must be a finite number. Actual: NaN");
    expect(() => yeoJohnson(1, Infinity)).toThrow("lambda must be a finite number. Actual: Infinity");
    expect(() => yeoJohnsonInverse(Number.NaN, 1)).toThrow("y must be a number (not NaN). Actual: NaN");
  });
});

describe("fitYeoJohnsonLambda", () => {
  it("reproduces scikit-learn's PowerTransformer docstring example", () => {
    // scikit-learn, sklearn/preprocessing/_data.py, PowerTransformer docstring: data
    // [[1, 2], [3, 2], [4, 5]] gives lambdas_ [1.386..., -3.100...]. The full printed values
    // 1.38668178 and -3.10053309 are scikit-learn's output as recorded in the expect test of
    // lehy/ocaml-sklearn (PowerTransformer example). The likelihood of three points is flat
    // enough that λ is only defined to ~1e-7 in double precision.
    const first = fitYeoJohnsonLambda(Float64Array.of(1, 3, 4));
    const second = fitYeoJohnsonLambda(Float64Array.of(2, 2, 5));
    expect(Math.trunc(first * 1000) / 1000).toBe(1.386);
    expect(Math.trunc(second * 1000) / 1000).toBe(-3.1);
    expect(Math.abs(first - 1.38668178)).toBeLessThan(1e-6);
    expect(Math.abs(second - -3.10053309)).toBeLessThan(1e-6);
  });

  it("agrees with a dense grid search of the profile likelihood written from the paper", () => {
    const samples = [
      lognormalSample(400, 3.5, 0.9, 11), // invented amounts
      Float64Array.from(lognormalSample(300, 1, 0.6, 12), (v) => v - 4), // shifted: both signs
      Float64Array.from(lognormalSample(300, 0, 1.2, 13), (v) => -v), // all negative
    ];
    for (const sample of samples) {
      const lambda = fitYeoJohnsonLambda(sample);
      const reference = gridSearchLambda(sample);
      expect(Math.abs(lambda - reference)).toBeLessThan(2e-5);
      // And it is a maximum: moving away lowers the likelihood.
      const at = referenceProfileLogLikelihood(sample, lambda);
      expect(referenceProfileLogLikelihood(sample, lambda + 1e-3)).toBeLessThan(at);
      expect(referenceProfileLogLikelihood(sample, lambda - 1e-3)).toBeLessThan(at);
    }
  });

  it("makes lognormal amounts nearly symmetric (skewness ≈ 0)", () => {
    const amounts = lognormalSample(5000, 3.5, 1, 42);
    expect(skewness(amounts)).toBeGreaterThan(3);
    const lambda = fitYeoJohnsonLambda(amounts);
    const transformed = Array.from(amounts, (x) => yeoJohnson(x, lambda));
    expect(Math.abs(skewness(transformed))).toBeLessThan(0.05);
    // ln(1 + x) ≈ ln x for amounts around e^3.5 ≈ 33, so λ lands near the log transform.
    expect(Math.abs(lambda)).toBeLessThan(0.1);
  });

  it("returns 2 − λ for the mirrored sample, as ψ(−x, 2 − λ) = −ψ(x, λ)", () => {
    const sample = lognormalSample(500, 2, 0.7, 7);
    const mirrored = Float64Array.from(sample, (v) => -v);
    expect(fitYeoJohnsonLambda(mirrored)).toBeCloseTo(2 - fitYeoJohnsonLambda(sample), 5);
  });

  it("returns 1 (the identity) for a constant sample and for a single value", () => {
    expect(fitYeoJohnsonLambda(new Float64Array(50).fill(12.5))).toBe(1);
    expect(fitYeoJohnsonLambda(Float64Array.of(-3))).toBe(1);
    expect(fitYeoJohnsonLambda(new Float64Array(10))).toBe(1);
  });

  it("fits a sample with many zeros and keeps every zero at 0", () => {
    // Invented counts of previous chargebacks: mostly 0, a skewed tail.
    const uniform = mulberry32(5).uniformOpen;
    const counts = Float64Array.from({ length: 600 }, () => (uniform() < 0.6 ? 0 : Math.floor(Math.exp(2 * uniform()))));
    const lambda = fitYeoJohnsonLambda(counts);
    expect(lambda).toBeGreaterThanOrEqual(-5);
    expect(lambda).toBeLessThanOrEqual(5);
    expect(Math.abs(lambda - gridSearchLambda(counts))).toBeLessThan(2e-5);
    expect(yeoJohnson(0, lambda)).toBe(0);
  });

  it("stops at the end of the search range when the likelihood keeps rising", () => {
    // Two values far apart plus a crowd at the top: the likelihood rises as λ grows.
    const sample = Float64Array.from({ length: 40 }, (_, i) => (i === 0 ? 0 : 100 + i * 1e-3));
    const lambda = fitYeoJohnsonLambda(sample);
    expect(lambda).toBeGreaterThan(4.99);
    expect(lambda).toBeLessThanOrEqual(5);
  });

  it("rejects an empty sample and names the index of a non-finite value", () => {
    expect(() => fitYeoJohnsonLambda(new Float64Array(0))).toThrow("values must hold at least one value for a Yeo–Johnson fit. Actual: 0 values");
    expect(() => fitYeoJohnsonLambda(Float64Array.of(1, 2, Number.NaN))).toThrow("values[2] must be a finite number. Actual: NaN");
  });
});

describe("fitFeatures", () => {
  it("fits λ for Yeo–Johnson features only and fills the columns of every feature", () => {
    const decls: FeatureDeclaration[] = [
      { name: "amount", transform: "yeo-johnson" },
      { name: "hour", transform: "cyclic-hour" },
      { name: "items", transform: "log1p" },
    ];
    const amounts = lognormalSample(300, 3, 0.8, 3);
    const asked: number[] = [];
    const features = fitFeatures(decls, (i) => {
      asked.push(i);
      return amounts;
    });
    expect(asked).toEqual([0]);
    expect(features).toEqual([
      { name: "amount", transform: "yeo-johnson", lambda: fitYeoJohnsonLambda(amounts), columns: ["amount"] },
      { name: "hour", transform: "cyclic-hour", columns: ["hour.sin", "hour.cos"] },
      { name: "items", transform: "log1p", columns: ["items"] },
    ]);
  });

  it("names the feature whose sample cannot be fitted", () => {
    expect(() => fitFeatures([{ name: "amount", transform: "yeo-johnson" }], () => new Float64Array(0))).toThrow(
      "feature amount (yeo-johnson): values must hold at least one value",
    );
  });
});

describe("transformInto", () => {
  it("writes every model column in order", () => {
    const features = [fitted("amount", "log"), fitted("hour", "cyclic-hour"), fitted("items", "log1p"), fitted("delta", "yeo-johnson", 0.5), fitted("share", "none")];
    const out = new Float64Array(6);
    transformInto(features, [42.5, 18, 3, 3, 0.25], out);
    expect(out[0]).toBe(Math.log(42.5));
    expect(out[1]).toBeCloseTo(-1, 15); // 18:00 is three quarters round the clock
    expect(out[2]).toBeCloseTo(0, 15);
    expect(out[3]).toBe(Math.log1p(3));
    expect(out[4]).toBeCloseTo(2, 15);
    expect(out[5]).toBe(0.25);
  });

  it("rejects a raw vector or output of the wrong length and a Yeo–Johnson feature without λ", () => {
    const features = [fitted("amount", "log"), fitted("hour", "cyclic-hour")];
    expect(() => transformInto(features, [1], new Float64Array(3))).toThrow("raw must hold one value per feature (2). Actual: 1 values");
    expect(() => transformInto(features, [1, 2], new Float64Array(2))).toThrow("out must have one slot per model column (3). Actual: length 2");
    expect(() => transformInto([fitted("delta", "yeo-johnson")], [1], new Float64Array(1))).toThrow("delta");
  });
});

describe("inverseTransform", () => {
  it("undoes each single-column transform for arbitrary in-domain values", () => {
    fc.assert(
      fc.property(fc.double({ min: -1e6, max: 1e6, noNaN: true }), fc.double({ min: -5, max: 5, noNaN: true }), (x, lambda) => {
        const roundTrip = (feature: FittedFeature, value: number) => {
          const out = new Float64Array(1);
          transformInto([feature], [value], out);
          return inverseTransform(feature, out[0]);
        };
        const tolerance = 1e-9 * (1 + Math.abs(x));
        expect(roundTrip(fitted("a", "none"), x)).toBe(x);
        if (x > 0) expect(Math.abs(roundTrip(fitted("a", "log"), x) - x)).toBeLessThanOrEqual(tolerance);
        if (x > -1) expect(Math.abs(roundTrip(fitted("a", "log1p"), x) - x)).toBeLessThanOrEqual(tolerance);
        const exponent = x >= 0 ? lambda * Math.log1p(x) : (2 - lambda) * Math.log1p(-x);
        if (exponent > -10) expect(Math.abs(roundTrip(fitted("a", "yeo-johnson", lambda), x) - x)).toBeLessThanOrEqual(tolerance);
      }),
      { numRuns: 2000 },
    );
  });

  it("refuses cyclic-hour features, Yeo–Johnson features without λ and NaN values", () => {
    expect(() => inverseTransform(fitted("hour", "cyclic-hour"), 0.5)).toThrow("use hourFromCyclic");
    expect(() => inverseTransform(fitted("delta", "yeo-johnson"), 0.5)).toThrow("without a fitted finite lambda");
    expect(() => inverseTransform(fitted("amount", "log"), Number.NaN)).toThrow("value must be a number (not NaN). Actual: NaN");
  });
});

describe("hourFromCyclic", () => {
  it("recovers the hour from its sine and cosine for arbitrary hours of the day", () => {
    fc.assert(
      fc.property(fc.double({ min: 0, max: 24, maxExcluded: true, noNaN: true }), (hour) => {
        const out = new Float64Array(2);
        transformInto([fitted("hour", "cyclic-hour")], [hour], out);
        const back = hourFromCyclic(out[0], out[1]);
        const circular = Math.min(Math.abs(back - hour), 24 - Math.abs(back - hour));
        expect(circular).toBeLessThan(1e-12);
        expect(back).toBeGreaterThanOrEqual(0);
        expect(back).toBeLessThan(24);
      }),
      { numRuns: 2000 },
    );
  });

  it("uses only the direction of the point, wraps into [0, period) and honours the period", () => {
    expect(hourFromCyclic(0.2, 0)).toBeCloseTo(6, 12);
    expect(hourFromCyclic(-3, 0)).toBeCloseTo(18, 12);
    expect(hourFromCyclic(0, -0.1)).toBeCloseTo(12, 12);
    expect(hourFromCyclic(-1e-300, 1)).toBe(0);
    expect(hourFromCyclic(1, 0, 7)).toBeCloseTo(1.75, 12);
  });

  it("rejects the origin, non-finite coordinates and a bad period", () => {
    expect(() => hourFromCyclic(0, 0)).toThrow("sin and cos must not both be 0");
    expect(() => hourFromCyclic(Number.NaN, 1)).toThrow("sin must be a finite number. Actual: NaN");
    expect(() => hourFromCyclic(1, 1, 0)).toThrow("period must be a finite number > 0. Actual: 0");
  });
});
