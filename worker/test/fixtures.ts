/**
 * Invented payments of a fictional online shop, and models fitted to them through the real model
 * core (`fitModel`), so every artifact the tests publish is one the core itself produced and
 * sealed. No numbers here come from real transactions.
 */
import { fitModel, type FeatureDeclaration, type FitRow, type ModelArtifact } from "../../shared-model/src";
import { mulberry32 } from "../../shared-model/src/seeded-stream";

/** Features of the small test model (five features, six model columns). */
export const SHOP_FEATURES: FeatureDeclaration[] = [
  { name: "amount", transform: "log" },
  { name: "items", transform: "log1p" },
  { name: "shippingShare", transform: "none" },
  { name: "accountAgeDays", transform: "log1p" },
  { name: "hourOfDay", transform: "cyclic-hour" },
];

/** One invented payment: raw features by name and its sales channel. */
export interface ShopPayment {
  features: Record<string, number>;
  channel: string;
}

/** Typical payments: amount grows with items, shipping share shrinks with amount. */
export function shopPayments(count: number, seed: number): ShopPayment[] {
  const rng = mulberry32(seed);
  const out: ShopPayment[] = [];
  for (let i = 0; i < count; i++) {
    const size = rng.normal();
    const items = Math.max(1, Math.round(Math.exp(0.9 + 0.45 * size + 0.2 * rng.normal())));
    const amount = Math.exp(3.6 + 0.35 * Math.log(items) + 0.25 * size + 0.3 * rng.normal());
    const shippingShare = Math.min(0.45, Math.max(0.01, 0.16 - 0.03 * size + 0.025 * rng.normal()));
    const accountAgeDays = Math.max(0, Math.round(Math.exp(5 + 1.1 * rng.normal())));
    const hourOfDay = (((19 + 4.5 * rng.normal()) % 24) + 24) % 24;
    const u = rng.uniform();
    const channel = u < 0.6 ? "web" : u < 0.96 ? "app" : "phone";
    out.push({
      features: {
        amount: round2(amount),
        items,
        shippingShare: round4(shippingShare),
        accountAgeDays,
        hourOfDay: round4(hourOfDay),
      },
      channel,
    });
  }
  return out;
}

/** A payment far from the shop's usual traffic: a large basket at 4 a.m. on a day-old account. */
export const UNUSUAL_PAYMENT: Record<string, number> = {
  amount: 2450,
  items: 1,
  shippingShare: 0.01,
  accountAgeDays: 1,
  hourOfDay: 4.25,
};

/**
 * Fits a model to invented payments with the real core.
 *
 * @param version artifact version (the core derives one when absent).
 */
export async function fitShopModel(
  options: { seed?: number; rows?: number; version?: string; cutoffRate?: number; features?: FeatureDeclaration[]; segmentBy?: string | null } = {},
): Promise<ModelArtifact> {
  const features = options.features ?? SHOP_FEATURES;
  const payments = shopPayments(options.rows ?? 3000, options.seed ?? 11);
  const rows: FitRow[] = payments.map((p) => ({
    values: Float64Array.from(features.map((f) => p.features[f.name])),
    segment: options.segmentBy === null ? null : p.channel,
  }));
  const { artifact } = await fitModel(
    {
      async *pass() {
        yield* rows;
      },
    },
    {
      features,
      shape: "full",
      estimator: "classical",
      segmentBy: options.segmentBy === undefined ? "channel" : options.segmentBy,
      cutoffRate: options.cutoffRate ?? 0.02,
      seed: 5,
      createdAt: "2026-03-02T09:00:00.000Z",
      source: "worker tests (invented payments)",
      ...(options.version ? { version: options.version } : {}),
    },
  );
  return artifact;
}

/** A request body for `POST /v1/score`. */
export function scoreBody(transactionId: string, payment: ShopPayment, extra: Record<string, unknown> = {}): Record<string, unknown> {
  return { transactionId, features: { ...payment.features }, segment: payment.channel, ...extra };
}

function round2(x: number): number {
  return Math.round(x * 100) / 100;
}
function round4(x: number): number {
  return Math.round(x * 10000) / 10000;
}
