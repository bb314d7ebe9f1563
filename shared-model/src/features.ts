/**
 * Feature declarations and the transforms that map raw payment fields to model columns before the
 * Gaussian is fitted or scored. The fit and the scorer run this same code, so a model never sees a
 * transform it was not fitted with.
 *
 * Transforms (all monotone, so ranges map back to raw units):
 * - `none`: x.
 * - `log`: ln x, for x > 0 (amounts, durations).
 * - `log1p`: ln(1 + x), for x > −1 (counts that can be 0).
 * - `yeo-johnson`: the power transform of Yeo & Johnson [1] with λ fitted by maximum likelihood on
 *   the training sample; defined for every real x.
 * - `cyclic-hour`: hour of day h ∈ [0, 24) → (sin 2πh/24, cos 2πh/24), two model columns
 *   `<name>.sin`, `<name>.cos`, so 23:30 sits next to 00:30.
 *
 * References:
 * [1] Yeo, I.-K. & Johnson, R. A. (2000) "A new family of power transformations to improve
 *     normality or symmetry", Biometrika 87(4):954–959.
 * [2] Brent, R. P. (1973) Algorithms for Minimization without Derivatives, Prentice-Hall, ch. 5
 *     (minimisation by golden section and successive parabolic interpolation).
 */
import { InputError } from "./input-error";
import { z } from "zod";
import { formatFieldPath } from "./field-path";
import type { FeatureDeclaration, FittedFeature, TransformKind } from "./types";

/** Every transform kind, in the order the documentation lists them. */
export const TRANSFORM_KINDS: readonly TransformKind[] = ["none", "log", "log1p", "yeo-johnson", "cyclic-hour"];

/** Longest feature name accepted, in characters (code points). */
export const MAX_FEATURE_NAME_LENGTH = 64;

/**
 * Range searched for the Yeo–Johnson λ. Wider than the [−2, 2] start bracket of common
 * implementations so that published small examples (λ ≈ −3.1 in scikit-learn's PowerTransformer
 * docstring) are reproduced; a likelihood still rising at an end returns that end, because λ
 * beyond ±5 makes the transform numerically brittle for no practical gain in normality.
 */
export const YEO_JOHNSON_LAMBDA_RANGE: readonly [number, number] = [-5, 5];

const HOURS_PER_DAY = 24;
const RADIANS_PER_HOUR = (2 * Math.PI) / HOURS_PER_DAY;

// ---------------------------------------------------------------------------------------------
// Feature spec (JSON file) parsing
// ---------------------------------------------------------------------------------------------

/** One rule a feature spec breaks: where, and what was expected and what came. */
export interface FeatureSpecProblem {
  /** Path into the spec, e.g. `features[2].transform`; `spec` for the document itself. */
  field: string;
  /** The rule with what came, e.g. `must be one of none, log, …; got "sqrt"`. */
  rule: string;
}

/**
 * A feature spec that breaks a rule. `field` and `rule` describe the first problem; `problems`
 * lists every problem found, in document order.
 */
export class FeatureSpecError extends InputError {
  readonly problems: FeatureSpecProblem[];

  constructor(problems: FeatureSpecProblem[]) {
    const [first] = problems;
    const more =
      problems.length > 1
        ? ` (and ${problems.length - 1} more: ${problems
            .slice(1)
            .map((p) => `${p.field} ${p.rule}`)
            .join("; ")})`
        : "";
    super(first.field, first.rule, `Invalid feature spec: ${first.field} ${first.rule}${more}`);
    this.problems = problems;
  }
}

/**
 * Describes a received JSON value for an error message: `nothing`, `null`, `an array of 3`,
 * `an object`, a quoted string (cut at 80 characters) or the number.
 * @example describeReceived("sqrt") // "\"sqrt\""
 */
export function describeReceived(value: unknown): string {
  if (value === undefined) return "nothing";
  if (value === null) return "null";
  if (Array.isArray(value)) return `an array of ${value.length}`;
  if (typeof value === "object") return "an object";
  if (typeof value === "string") return JSON.stringify(value.length > 80 ? `${value.slice(0, 80)}…` : value);
  return String(value);
}

/** zod error callback: "is required" when the key is missing, else `must be <expected>`. */
export function expecting(expected: string) {
  return (issue: { input?: unknown }) => (issue.input === undefined ? "is required" : `must be ${expected}`);
}

/** zod schema of a feature name: non-empty, at most 64 characters, no comma, no surrounding whitespace. */
export const featureNameSchema = z
  .string({ error: expecting("a string") })
  .min(1, { error: "must not be empty" })
  .refine((name) => [...name].length <= MAX_FEATURE_NAME_LENGTH, { error: `must be at most ${MAX_FEATURE_NAME_LENGTH} characters` })
  // Names are written into CSV headers and comma-separated --features lists.
  .refine((name) => !name.includes(","), { error: "must not contain a comma" })
  .refine((name) => name.length === 0 || name.trim() === name, { error: "must not start or end with whitespace" });

/** zod schema of a transform kind, with an error listing the kinds. */
export const featureTransformSchema = z.enum(TRANSFORM_KINDS as [TransformKind, ...TransformKind[]], {
  error: (issue) => (issue.input === undefined ? "is required" : `must be one of ${TRANSFORM_KINDS.join(", ")}`),
});

const featureSchema = z.strictObject(
  { name: featureNameSchema, transform: featureTransformSchema },
  { error: (issue) => (issue.code === "unrecognized_keys" ? undefined : expecting('an object { "name": …, "transform": … }')(issue)) },
);

/**
 * zod schema of a feature spec file: `{ "features": [ { "name": "amount", "transform": "log" }, … ] }`.
 * At least one feature; names non-empty, at most 64 characters, without commas or surrounding
 * whitespace, unique; model column names (`<name>.sin`/`.cos` for cyclic-hour) unique too;
 * unknown keys refused. Use {@link parseFeatureSpec} for errors that name field and rule.
 */
export const featureSpecSchema = z
  .strictObject(
    {
      features: z.array(featureSchema, { error: expecting('an array of { "name": …, "transform": … } objects') }).min(1, { error: "must list at least one feature" }),
    },
    { error: (issue) => (issue.code === "unrecognized_keys" ? undefined : 'must be an object { "features": [ … ] }') },
  )
  .superRefine((spec, context) => {
    const nameAt = new Map<string, number>();
    const columnAt = new Map<string, number>();
    spec.features.forEach((feature, i) => {
      const earlier = nameAt.get(feature.name);
      if (earlier !== undefined) {
        context.addIssue({
          code: "custom",
          path: ["features", i, "name"],
          message: `must be unique; features[${earlier}].name is also ${JSON.stringify(feature.name)}`,
        });
        return;
      }
      nameAt.set(feature.name, i);
      for (const column of columnsOf(feature)) {
        const owner = columnAt.get(column);
        if (owner !== undefined && owner !== i) {
          context.addIssue({
            code: "custom",
            path: ["features", i, "name"],
            message: `must not produce model column ${JSON.stringify(column)}, ` + `which features[${owner}] (${JSON.stringify(spec.features[owner].name)}) already produces`,
          });
        }
        columnAt.set(column, i);
      }
    });
  });

/** ["features", 2, "transform"] → "features[2].transform"; the empty path is the document, "spec". */
function formatPath(path: readonly PropertyKey[]): string {
  return path.length === 0 ? "spec" : formatFieldPath(path);
}

function valueAt(json: unknown, path: readonly PropertyKey[]): unknown {
  let node = json;
  for (const key of path) {
    if (node === null || typeof node !== "object" || !Object.hasOwn(node, key)) return undefined;
    node = (node as Record<PropertyKey, unknown>)[key];
  }
  return node;
}

/**
 * Parses and validates a feature spec document (already JSON-decoded).
 * @param json the decoded spec, `{ "features": [ { "name": "amount", "transform": "log" }, … ] }`
 * @returns the declarations, in order
 * @throws {FeatureSpecError} naming the field (`features[2].transform`) and the rule
 *   (`must be one of none, log, log1p, yeo-johnson, cyclic-hour; got "sqrt"`) of every problem
 * @example parseFeatureSpec({ features: [{ name: "amount", transform: "log" }] }) // [{ name: "amount", transform: "log" }]
 */
export function parseFeatureSpec(json: unknown): FeatureDeclaration[] {
  const result = featureSpecSchema.safeParse(json);
  if (result.success) return result.data.features.map((f) => ({ name: f.name, transform: f.transform }));
  throw new FeatureSpecError(specProblems(json, result.error.issues, (parent) => (parent.length === 0 ? "features" : "name, transform")));
}

/**
 * Turns zod issues over a spec document into problems that name the field and the rule with what
 * came; an unknown key lists the keys allowed where it stands.
 * @param json the decoded document the issues refer to
 * @param issues zod's issues, in document order
 * @param allowedAt the keys allowed in the object at a path, e.g. `"name, transform"`
 * @example specProblems({ features: 1 }, issues, () => "features") // [{ field: "features", rule: "must be …; got 1" }]
 */
export function specProblems(
  json: unknown,
  issues: readonly { code: string; path: readonly PropertyKey[]; message: string; keys?: readonly string[] }[],
  allowedAt: (parent: readonly PropertyKey[]) => string,
): FeatureSpecProblem[] {
  const problems: FeatureSpecProblem[] = [];
  for (const issue of issues) {
    if (issue.code === "unrecognized_keys") {
      const parent = issue.path;
      for (const key of issue.keys ?? []) {
        const received = describeReceived(valueAt(json, [...parent, key]));
        problems.push({ field: formatPath([...parent, key]), rule: `is not a recognised key (allowed: ${allowedAt(parent)}); got ${received}` });
      }
      continue;
    }
    const received = valueAt(json, issue.path);
    const rule = issue.message === "is required" ? issue.message : `${issue.message}; got ${describeReceived(received)}`;
    problems.push({ field: formatPath(issue.path), rule });
  }
  return problems;
}

// ---------------------------------------------------------------------------------------------
// Columns and domains
// ---------------------------------------------------------------------------------------------

/**
 * Model column names a feature produces: `[name]`, or `[name + ".sin", name + ".cos"]` for
 * cyclic-hour.
 * @example columnsOf({ name: "hour", transform: "cyclic-hour" }) // ["hour.sin", "hour.cos"]
 */
export function columnsOf(decl: FeatureDeclaration): string[] {
  return decl.transform === "cyclic-hour" ? [`${decl.name}.sin`, `${decl.name}.cos`] : [decl.name];
}

/**
 * Model column names of all features, in feature order (the order of the mean vector and of
 * the covariance rows).
 * @example modelColumns([{ name: "amount", transform: "log" }, { name: "hour", transform: "cyclic-hour" }]) // ["amount", "hour.sin", "hour.cos"]
 */
export function modelColumns(features: readonly FeatureDeclaration[]): string[] {
  return features.flatMap(columnsOf);
}

/**
 * Checks one raw value against its feature's transform: finite, and inside the domain (log: > 0;
 * log1p: > −1; cyclic-hour: an hour of day in [0, 24)).
 * @returns null when the value can be transformed, else the rule with what came, e.g.
 *   `must be > 0 for the log transform; got -3` (the caller adds the field name)
 * @example checkRawValue({ name: "amount", transform: "log" }, -3) // "must be > 0 for the log transform; got -3"
 */
export function checkRawValue(feature: FeatureDeclaration, value: number): string | null {
  if (typeof value !== "number" || !Number.isFinite(value)) return `must be a finite number; got ${describeReceived(value)}`;
  switch (feature.transform) {
    case "log":
      return value > 0 ? null : `must be > 0 for the log transform; got ${value}`;
    case "log1p":
      return value > -1 ? null : `must be > -1 for the log1p transform; got ${value}`;
    case "cyclic-hour":
      return value >= 0 && value < HOURS_PER_DAY ? null : `must be an hour of day in [0, 24) for the cyclic-hour transform; got ${value}`;
    case "none":
    case "yeo-johnson":
      return null;
    default:
      return `cannot be checked: unknown transform ${describeReceived((feature as { transform: unknown }).transform)}`;
  }
}

// ---------------------------------------------------------------------------------------------
// Yeo–Johnson
// ---------------------------------------------------------------------------------------------

/**
 * Powers this close to 0 take the logarithmic branch: λ·ln(1+|x|) could underflow to 0 and turn
 * expm1(·)/λ into 0, while the logarithm differs from the power branch by a factor 1 + O(λ·ln(1+|x|)).
 */
const NEGLIGIBLE_POWER = 1e-200;

/** ψ(x, λ) without argument checks (hot path). expm1/log1p keep λ ≈ 0 and λ ≈ 2 accurate. */
function yeoJohnsonUnchecked(x: number, lambda: number): number {
  if (x >= 0) return Math.abs(lambda) < NEGLIGIBLE_POWER ? Math.log1p(x) : Math.expm1(lambda * Math.log1p(x)) / lambda;
  const mu = 2 - lambda;
  return Math.abs(mu) < NEGLIGIBLE_POWER ? -Math.log1p(-x) : -Math.expm1(mu * Math.log1p(-x)) / mu;
}

function yeoJohnsonInverseUnchecked(y: number, lambda: number): number {
  if (y >= 0) {
    if (Math.abs(lambda) < NEGLIGIBLE_POWER) return Math.expm1(y);
    const base = lambda * y;
    // For λ < 0 the transform of x ≥ 0 never reaches −1/λ: beyond it there is no raw value.
    if (base <= -1) return Infinity;
    return Math.expm1(Math.log1p(base) / lambda);
  }
  const mu = 2 - lambda;
  if (Math.abs(mu) < NEGLIGIBLE_POWER) return -Math.expm1(-y);
  const base = -mu * y;
  if (base <= -1) return -Infinity;
  return -Math.expm1(Math.log1p(base) / mu);
}

function requireFinite(name: string, value: number): void {
  if (typeof value !== "number" || !Number.isFinite(value)) {
    throw new RangeError(`${name} must be a finite number. Actual: ${describeReceived(value)}`);
  }
}

/**
 * Yeo–Johnson transform ψ(x, λ) [1]:
 * ((x+1)^λ − 1)/λ for x ≥ 0, λ ≠ 0; ln(x+1) for x ≥ 0, λ = 0;
 * −((1−x)^{2−λ} − 1)/(2−λ) for x < 0, λ ≠ 2; −ln(1−x) for x < 0, λ = 2.
 * @param x raw value (any finite number)
 * @param lambda power λ (finite)
 * @throws {RangeError} when x or lambda is not finite
 * @example yeoJohnson(3, 0.5) // 2·(√4 − 1) = 2
 */
export function yeoJohnson(x: number, lambda: number): number {
  requireFinite("x", x);
  requireFinite("lambda", lambda);
  return yeoJohnsonUnchecked(x, lambda);
}

/**
 * Inverse Yeo–Johnson transform: the raw x with ψ(x, λ) = y. The transform's range is bounded
 * for λ < 0 (above by −1/λ) and for λ > 2 (below by −1/(λ−2)); beyond those bounds the inverse
 * saturates to +Infinity / −Infinity (useful when a model-unit range is mapped back).
 * @param y value in model units (Infinity allowed)
 * @param lambda power λ (finite)
 * @throws {RangeError} when y is NaN or lambda is not finite
 * @example yeoJohnsonInverse(2, 0.5) // 3
 */
export function yeoJohnsonInverse(y: number, lambda: number): number {
  if (typeof y !== "number" || Number.isNaN(y)) throw new RangeError(`y must be a number (not NaN). Actual: ${describeReceived(y)}`);
  requireFinite("lambda", lambda);
  return yeoJohnsonInverseUnchecked(y, lambda);
}

/**
 * Minimises f on [a, b] by Brent's method (golden section with parabolic steps; [2] ch. 5).
 * Returns the abscissa of the minimum, to about √ε·|x| + tol.
 */
function brentMinimize(f: (x: number) => number, lower: number, upper: number, tol: number): number {
  const golden = (3 - Math.sqrt(5)) / 2;
  const sqrtEps = Math.sqrt(Number.EPSILON);
  let a = lower;
  let b = upper;
  let x = a + golden * (b - a);
  let w = x;
  let v = x;
  let fx = f(x);
  let fw = fx;
  let fv = fx;
  let step = 0; // last step taken
  let stepBefore = 0; // the step before that: parabolic steps must shrink faster than it
  for (let iteration = 0; iteration < 200; iteration++) {
    const middle = 0.5 * (a + b);
    const tol1 = sqrtEps * Math.abs(x) + tol / 3;
    const tol2 = 2 * tol1;
    if (Math.abs(x - middle) <= tol2 - 0.5 * (b - a)) break;
    let parabolic = false;
    if (Math.abs(stepBefore) > tol1) {
      // Parabola through (x, fx), (w, fw), (v, fv): its vertex is x + p/q.
      const r = (x - w) * (fx - fv);
      let q = (x - v) * (fx - fw);
      let p = (x - v) * q - (x - w) * r;
      q = 2 * (q - r);
      if (q > 0) p = -p;
      else q = -q;
      const previous = stepBefore;
      stepBefore = step;
      if (Math.abs(p) < Math.abs(0.5 * q * previous) && p > q * (a - x) && p < q * (b - x)) {
        step = p / q;
        const u = x + step;
        if (u - a < tol2 || b - u < tol2) step = x < middle ? tol1 : -tol1;
        parabolic = true;
      }
    }
    if (!parabolic) {
      stepBefore = (x < middle ? b : a) - x;
      step = golden * stepBefore;
    }
    const u = x + (Math.abs(step) >= tol1 ? step : step > 0 ? tol1 : -tol1);
    const fu = f(u);
    if (fu <= fx) {
      if (u < x) b = x;
      else a = x;
      v = w;
      fv = fw;
      w = x;
      fw = fx;
      x = u;
      fx = fu;
    } else {
      if (u < x) a = u;
      else b = u;
      if (fu <= fw || w === x) {
        v = w;
        fv = fw;
        w = u;
        fw = fu;
      } else if (fu <= fv || v === x || v === w) {
        v = u;
        fv = fu;
      }
    }
  }
  return x;
}

/**
 * Fits the Yeo–Johnson λ by maximum likelihood [1]: maximises the profile log-likelihood
 *   ℓ(λ) = −(m/2)·ln σ̂²(λ) + (λ − 1)·Σᵢ sign(xᵢ)·ln(|xᵢ| + 1),
 * where σ̂²(λ) is the variance of ψ(xᵢ, λ) with denominator m (maximum likelihood).
 * Search: ℓ on a grid of step 0.25 over {@link YEO_JOHNSON_LAMBDA_RANGE}, then Brent's method [2]
 * between the grid neighbours of the best point (the grid guards against a second local maximum).
 *
 * Edge cases: a constant sample (one distinct value, including a single value) identifies no λ
 * and returns 1, the identity transform (the diagnostics report the constant column); zeros are
 * fixed points of every ψ and add nothing to the Jacobian term; negative values use the mirrored
 * branch, so fitting −x gives 2 − λ of x. A maximum beyond the search range returns its end.
 *
 * @param values the training sample of one feature's raw values (finite, at least one)
 * @returns λ in [−5, 5]
 * @throws {RangeError} when the sample is empty or holds a non-finite value (naming its index)
 * @example fitYeoJohnsonLambda(Float64Array.of(1, 3, 4)) // ≈ 1.3867
 */
export function fitYeoJohnsonLambda(values: Float64Array): number {
  const m = values.length;
  if (m === 0) throw new RangeError("values must hold at least one value for a Yeo–Johnson fit. Actual: 0 values");
  let min = Infinity;
  let max = -Infinity;
  for (let i = 0; i < m; i++) {
    const v = values[i];
    if (!Number.isFinite(v)) throw new RangeError(`values[${i}] must be a finite number. Actual: ${v}`);
    if (v < min) min = v;
    if (v > max) max = v;
  }
  if (min === max) return 1;

  // ln(|x|+1) and the Jacobian term do not depend on λ: compute them once.
  const logMagnitude = new Float64Array(m);
  let jacobian = 0;
  for (let i = 0; i < m; i++) {
    const v = values[i];
    logMagnitude[i] = Math.log1p(Math.abs(v));
    jacobian += v >= 0 ? logMagnitude[i] : -logMagnitude[i];
  }
  const transformed = new Float64Array(m);

  const negativeLogLikelihood = (lambda: number): number => {
    const mu = 2 - lambda;
    let sum = 0;
    let largest = 0;
    for (let i = 0; i < m; i++) {
      const l = logMagnitude[i];
      let y: number;
      if (values[i] >= 0) y = Math.abs(lambda) < NEGLIGIBLE_POWER ? l : Math.expm1(lambda * l) / lambda;
      else y = Math.abs(mu) < NEGLIGIBLE_POWER ? -l : -Math.expm1(mu * l) / mu;
      transformed[i] = y;
      sum += y;
      if (Math.abs(y) > largest) largest = Math.abs(y);
    }
    const mean = sum / m;
    let squares = 0;
    for (let i = 0; i < m; i++) {
      const d = transformed[i] - mean;
      squares += d * d;
    }
    const variance = squares / m;
    // A spread at the rounding level of the values is no spread: ln of it would reward the λ
    // that squashes the sample flat. Overflow (huge |x| with large |λ|) is rejected the same way.
    const floor = Number.EPSILON * largest;
    if (!(variance > floor * floor) || !Number.isFinite(variance)) return Infinity;
    return 0.5 * m * Math.log(variance) - (lambda - 1) * jacobian;
  };

  const [low, high] = YEO_JOHNSON_LAMBDA_RANGE;
  const gridStep = 0.25;
  const gridPoints = Math.round((high - low) / gridStep);
  let bestIndex = 0;
  let bestValue = Infinity;
  for (let j = 0; j <= gridPoints; j++) {
    const value = negativeLogLikelihood(low + j * gridStep);
    if (value < bestValue) {
      bestValue = value;
      bestIndex = j;
    }
  }
  const gridBest = low + bestIndex * gridStep;
  if (!Number.isFinite(bestValue)) return 1;
  const refined = brentMinimize(negativeLogLikelihood, Math.max(low, gridBest - gridStep), Math.min(high, gridBest + gridStep), 1e-10);
  return negativeLogLikelihood(refined) <= bestValue ? refined : gridBest;
}

// ---------------------------------------------------------------------------------------------
// Fitting and applying the transforms
// ---------------------------------------------------------------------------------------------

/**
 * Fits every feature's transform parameters: λ for Yeo–Johnson features (by maximum likelihood on
 * `sampleOf(i)`); the other transforms need no data, and `sampleOf` is not called for them.
 * @param decls the declared features, in order
 * @param sampleOf raw training values of feature i (called once per Yeo–Johnson feature)
 * @returns fitted features with `columns` filled (and `lambda` for Yeo–Johnson)
 * @throws {RangeError} naming the feature when its sample is empty or holds a non-finite value,
 *   or when a declaration has an unknown transform
 * @example fitFeatures([{ name: "amount", transform: "yeo-johnson" }], () => sample)
 * // [{ name: "amount", transform: "yeo-johnson", lambda: 0.08, columns: ["amount"] }]
 */
export function fitFeatures(decls: readonly FeatureDeclaration[], sampleOf: (featureIndex: number) => Float64Array): FittedFeature[] {
  return decls.map((decl, i) => {
    if (!TRANSFORM_KINDS.includes(decl.transform)) {
      throw new RangeError(`features[${i}].transform must be one of ${TRANSFORM_KINDS.join(", ")}. Actual: ${describeReceived(decl.transform)}`);
    }
    const fitted: FittedFeature = { name: decl.name, transform: decl.transform, columns: columnsOf(decl) };
    if (decl.transform === "yeo-johnson") {
      try {
        fitted.lambda = fitYeoJohnsonLambda(sampleOf(i));
      } catch (error) {
        if (error instanceof RangeError) throw new RangeError(`feature ${decl.name} (yeo-johnson): ${error.message}`);
        throw error;
      }
    }
    return fitted;
  });
}

/**
 * Writes the model columns of one payment into `out` (scoring hot path: allocates nothing).
 * Values must already have passed {@link checkRawValue}; an out-of-domain value gives NaN or
 * −Infinity here rather than an error.
 * @param features fitted features, in order
 * @param raw raw values in feature order (length = features.length)
 * @param out destination, length = number of model columns
 * @throws {RangeError} on a length mismatch or a Yeo–Johnson feature without a fitted λ
 * @example transformInto(features, [42.5, 13], out) // out = [ln 42.5, sin(13π/12), cos(13π/12)]
 */
export function transformInto(features: readonly FittedFeature[], raw: ArrayLike<number>, out: Float64Array): void {
  if (raw.length !== features.length) {
    throw new RangeError(`raw must hold one value per feature (${features.length}). Actual: ${raw.length} values`);
  }
  let columns = 0;
  for (let i = 0; i < features.length; i++) columns += features[i].transform === "cyclic-hour" ? 2 : 1;
  if (out.length !== columns) {
    throw new RangeError(`out must have one slot per model column (${columns}). Actual: length ${out.length}`);
  }
  let c = 0;
  for (let i = 0; i < features.length; i++) {
    const feature = features[i];
    const value = raw[i];
    switch (feature.transform) {
      case "none":
        out[c++] = value;
        break;
      case "log":
        out[c++] = Math.log(value);
        break;
      case "log1p":
        out[c++] = Math.log1p(value);
        break;
      case "yeo-johnson": {
        const lambda = feature.lambda;
        if (typeof lambda !== "number" || !Number.isFinite(lambda)) {
          throw new RangeError(`features[${i}] (${feature.name}) is a yeo-johnson feature without a fitted finite lambda`);
        }
        out[c++] = yeoJohnsonUnchecked(value, lambda);
        break;
      }
      case "cyclic-hour": {
        const angle = RADIANS_PER_HOUR * value;
        out[c++] = Math.sin(angle);
        out[c++] = Math.cos(angle);
        break;
      }
      default:
        throw new RangeError(
          `features[${i}].transform must be one of ${TRANSFORM_KINDS.join(", ")}. ` + `Actual: ${describeReceived((feature as { transform: unknown }).transform)}`,
        );
    }
  }
}

/**
 * Maps a value in model units back to the feature's raw units (single-column features): none → x,
 * log → eʸ, log1p → eʸ − 1, yeo-johnson → ψ⁻¹(y, λ) (saturating to ±Infinity outside the
 * transform's range). Monotone, so a model-unit interval maps to a raw interval.
 * @param feature a fitted single-column feature
 * @param value a value in model units (±Infinity allowed)
 * @throws {RangeError} for cyclic-hour (two columns: use {@link hourFromCyclic}), a Yeo–Johnson
 *   feature without λ, or a NaN value
 * @example inverseTransform({ name: "amount", transform: "log", columns: ["amount"] }, Math.log(42)) // 42
 */
export function inverseTransform(feature: FittedFeature, value: number): number {
  if (typeof value !== "number" || Number.isNaN(value)) {
    throw new RangeError(`value must be a number (not NaN). Actual: ${describeReceived(value)}`);
  }
  switch (feature.transform) {
    case "none":
      return value;
    case "log":
      return Math.exp(value);
    case "log1p":
      return Math.expm1(value);
    case "yeo-johnson": {
      const lambda = feature.lambda;
      if (typeof lambda !== "number" || !Number.isFinite(lambda)) {
        throw new RangeError(`feature ${feature.name} is a yeo-johnson feature without a fitted finite lambda`);
      }
      return yeoJohnsonInverseUnchecked(value, lambda);
    }
    case "cyclic-hour":
      throw new RangeError(`feature ${feature.name} is cyclic-hour (two model columns); inverseTransform handles single-column features: use hourFromCyclic`);
    default:
      throw new RangeError(`feature ${feature.name} has an unknown transform ${describeReceived((feature as { transform: unknown }).transform)}`);
  }
}

/**
 * Inverse of the cyclic-hour transform: the hour whose (sin, cos) point has the direction of
 * (sin, cos), via atan2; the pair need not lie on the unit circle (a conditional mean does not).
 * @param sin the `.sin` column value
 * @param cos the `.cos` column value
 * @param period length of the cycle (default 24 hours)
 * @returns hour in [0, period)
 * @throws {RangeError} when sin or cos is not finite, both are 0 (no direction), or period is not
 *   a finite number > 0
 * @example hourFromCyclic(Math.sin(Math.PI / 2), Math.cos(Math.PI / 2)) // 6
 */
export function hourFromCyclic(sin: number, cos: number, period = HOURS_PER_DAY): number {
  requireFinite("sin", sin);
  requireFinite("cos", cos);
  if (typeof period !== "number" || !Number.isFinite(period) || period <= 0) {
    throw new RangeError(`period must be a finite number > 0. Actual: ${describeReceived(period)}`);
  }
  if (sin === 0 && cos === 0) throw new RangeError("sin and cos must not both be 0: the point (0, 0) has no direction, hence no hour");
  let hour = (Math.atan2(sin, cos) / (2 * Math.PI)) * period;
  if (hour < 0) hour += period;
  // −tiny + period rounds to period itself; the cycle starts again at 0.
  return hour >= period ? 0 : hour;
}
