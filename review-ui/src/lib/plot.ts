/**
 * Geometry for the pair plot: equal-density ellipses of a 2-D Gaussian and axis ticks placed at
 * round raw values (the model works in transformed units, analysts read raw ones).
 */
import { scaleLinear } from "d3-scale";
import { chiSquareQuantile } from "../../../shared-model/src/distributions";
import { inverseTransform, transformInto } from "../../../shared-model/src/features";
import type { FittedFeature } from "../../../shared-model/src/types";

/** Probability mass inside each drawn ellipse. */
export const ELLIPSE_LEVELS = [0.5, 0.9, 0.99] as const;

export type Point = [number, number];

/**
 * Points on the ellipse holding probability `level` of N(mean, covariance) in two dimensions.
 * For x ~ N(μ, Σ), (x−μ)ᵀΣ⁻¹(x−μ) ~ χ²₂, so the ellipse is μ + r·L·(cos t, sin t) with
 * r² = χ²₂(level) and L the Cholesky factor of Σ (L·Lᵀ = Σ).
 * @param covariance 2×2, symmetric positive definite (model units)
 * @example ellipsePoints([0, 0], [[1, 0], [0, 1]], 0.5).length // 97 (closed ring)
 */
export function ellipsePoints(mean: Point, covariance: [Point, Point], level: number, steps = 96): Point[] {
  const radius = Math.sqrt(chiSquareQuantile(level, 2));
  const l11 = Math.sqrt(covariance[0][0]);
  const l21 = covariance[1][0] / l11;
  const l22 = Math.sqrt(Math.max(covariance[1][1] - l21 * l21, 0));
  const points: Point[] = [];
  for (let i = 0; i <= steps; i++) {
    const t = (2 * Math.PI * i) / steps;
    const u = radius * Math.cos(t);
    const v = radius * Math.sin(t);
    points.push([mean[0] + l11 * u, mean[1] + l21 * u + l22 * v]);
  }
  return points;
}

/** Model-unit value of one raw value of a single-column feature (the scorer's own transform). */
export function toModelUnits(feature: FittedFeature, raw: number): number {
  const out = new Float64Array(1);
  transformInto([feature], [raw], out);
  return out[0];
}

/** A tick: where it sits (model units) and what it reads (raw units). */
export interface Tick {
  model: number;
  raw: number;
}

/**
 * Ticks for a model-unit domain, labelled at round raw values (1, 2, 5 × 10ᵏ, and 0) so that a
 * log-scaled axis reads 10, 20, 50, 100 rather than 2.30, 3.00, 3.91.
 * @param minGap smallest spacing between kept ticks, as a fraction of the domain
 */
export function rawTicks(feature: FittedFeature, domain: Point, minGap = 0.14): Tick[] {
  const [lo, hi] = domain;
  if (feature.transform === "none") {
    return scaleLinear()
      .domain(domain)
      .ticks(5)
      .map((v) => ({ model: v, raw: v }));
  }
  const rawLo = inverseTransform(feature, lo);
  const rawHi = inverseTransform(feature, hi);
  if (!Number.isFinite(rawLo) || !Number.isFinite(rawHi)) return [];
  const candidates = roundValuesBetween(Math.min(rawLo, rawHi), Math.max(rawLo, rawHi));
  const ticks = candidates.map((raw) => ({ raw, model: toModelUnits(feature, raw) })).filter((t) => Number.isFinite(t.model) && t.model >= lo && t.model <= hi);
  // Roundest first (0, then 1·10ᵏ, 5·10ᵏ, 2·10ᵏ), each kept only with room around it.
  ticks.sort((a, b) => roundness(a.raw) - roundness(b.raw));
  const kept: Tick[] = [];
  for (const tick of ticks) {
    if (kept.every((k) => Math.abs(k.model - tick.model) >= minGap * (hi - lo))) kept.push(tick);
  }
  return kept.sort((a, b) => a.model - b.model);
}

function roundness(value: number): number {
  if (value === 0) return 0;
  const leading = Math.round(Math.abs(value) / 10 ** Math.floor(Math.log10(Math.abs(value)) + 1e-9));
  return leading === 1 ? 1 : leading === 5 ? 2 : 3;
}

function roundValuesBetween(lo: number, hi: number): number[] {
  const values = new Set<number>();
  if (lo <= 0 && hi >= 0) values.add(0);
  const largest = Math.max(Math.abs(lo), Math.abs(hi));
  if (largest === 0) return [...values];
  const top = Math.ceil(Math.log10(largest));
  for (let k = top - 8; k <= top; k++) {
    for (const m of [1, 2, 5]) {
      const v = Number((m * 10 ** k).toPrecision(12));
      for (const signed of [v, -v]) if (signed >= lo && signed <= hi) values.add(signed);
    }
  }
  return [...values];
}

/** Domain covering the 99 % ellipse and the payment, padded so nothing touches the frame. */
export function pairDomain(outer: Point[], point: Point, axis: 0 | 1): Point {
  let lo = point[axis];
  let hi = point[axis];
  for (const p of outer) {
    lo = Math.min(lo, p[axis]);
    hi = Math.max(hi, p[axis]);
  }
  const pad = (hi - lo) * 0.08 || 1;
  return [lo - pad, hi + pad];
}
