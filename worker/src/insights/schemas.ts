/**
 * Request schemas of the insights API (`/v1/insights`). Query values arrive as strings; numbers are
 * parsed strictly (digits, optional fraction), so "7days" or "1e400" is refused with the rule.
 */
import { z } from "zod";
import { versionParamSchema } from "../routes/schemas";

const wholeDays = z
  .string()
  .regex(/^[0-9]{1,3}$/, { error: "must be a whole number of days from 1 to 90" })
  .transform(Number)
  .refine((n) => n >= 1 && n <= 90, { error: "must be a whole number of days from 1 to 90" });

const cutoffText = z
  .string()
  .regex(/^[0-9]{1,7}(\.[0-9]{1,20})?$/, { error: "must be a squared distance ≥ 0 written as a decimal number, e.g. 24.5" })
  .transform(Number);

/** `GET /model`: `?days=` (default 7). */
export const modelQuerySchema = z.strictObject({ days: wholeDays.optional() });
/** Accepted keys of {@link modelQuerySchema}. */
export const MODEL_QUERY_KEYS = ["days"] as const;

/** `GET /histogram`: `?days=` (default 7) and `?version=` (default the live one). */
export const windowQuerySchema = z.strictObject({ days: wholeDays.optional(), version: versionParamSchema.optional() });
/** Accepted keys of {@link windowQuerySchema}. */
export const WINDOW_QUERY_KEYS = ["days", "version"] as const;

/** `GET /operating`: `?version=` (default the live one), `?days=` for scored-per-day, `?cutoff=`. */
export const operatingQuerySchema = z.strictObject({
  version: versionParamSchema.optional(),
  days: wholeDays.optional(),
  cutoff: cutoffText.optional(),
});
/** Accepted keys of {@link operatingQuerySchema}. */
export const OPERATING_QUERY_KEYS = ["version", "days", "cutoff"] as const;

/** `GET /shadow`: `?shadowVersion=` (default the pointer's shadow). */
export const shadowQuerySchema = z.strictObject({ shadowVersion: versionParamSchema.optional() });
/** Accepted keys of {@link shadowQuerySchema}. */
export const SHADOW_QUERY_KEYS = ["shadowVersion"] as const;

/** Body of `POST /publish-cutoff`. */
export const publishCutoffSchema = z.strictObject({
  /** The live version the admin looked at; refused when another version went live meanwhile. */
  fromVersion: versionParamSchema,
  /** The new cutoff on d² (flag when d² > cutoff). */
  cutoffMahalanobisSq: z.number().refine((v) => Number.isFinite(v) && v >= 0 && v <= 1e7, { error: "must be a finite squared distance from 0 to 10000000" }),
  /** Expected share of payments flagged at the new cutoff (from the operating table), or null. */
  flagRate: z.number().min(0, { error: "must be a share from 0 to 1" }).max(1, { error: "must be a share from 0 to 1" }).nullable(),
  /** How the cutoff was chosen. */
  basis: z.enum(["manual", "f1", "capacity", "cost"]).default("manual"),
  /** Why, for the audit log. */
  reason: z.string().trim().min(3, { error: "must say why in 3 to 500 characters" }).max(500, { error: "must say why in 3 to 500 characters" }),
  /** Explicit confirmation: must be the literal string "publish". */
  confirm: z.literal("publish", { error: 'must be the string "publish" (the confirmation step)' }),
});
/** Accepted keys of {@link publishCutoffSchema}. */
export const PUBLISH_CUTOFF_KEYS = ["fromVersion", "cutoffMahalanobisSq", "flagRate", "basis", "reason", "confirm"] as const;
