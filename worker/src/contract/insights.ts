/**
 * The insights API's contract (`/v1/insights/*`, the model page): query strings and the publish
 * body it accepts, and its answers. Query values arrive as strings; numbers are parsed strictly
 * (digits, optional fraction), so "7days" or "1e400" is refused with the rule.
 *
 * Some answers carry figures the model core computes (drift, flag-rate checks, operating points,
 * estimates); their wire schemas are declared here and `contract.test.ts` checks at compile time
 * that each equals the core's type, so the two cannot drift apart.
 */
import { z } from "zod";
import { modelArtifactSchema } from "../../../shared-model/src/artifact";
import { renewReportSchema } from "../../../shared-model/src/renew-report";
import { isoTime, modelPointerSchema, versionParamSchema } from "./wire";

// ---------------------------------------------------------------------------------------------
// Requests
// ---------------------------------------------------------------------------------------------

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

/** `GET /histogram`: `?days=` (default 7) and `?version=` (default the live one). */
export const windowQuerySchema = z.strictObject({ days: wholeDays.optional(), version: versionParamSchema.optional() });

/** `GET /operating`: `?version=` (default the live one), `?days=` for scored-per-day, `?cutoff=`. */
export const operatingQuerySchema = z.strictObject({
  version: versionParamSchema.optional(),
  days: wholeDays.optional(),
  cutoff: cutoffText.optional(),
});

/** `GET /shadow`: `?shadowVersion=` (default the pointer's shadow). */
export const shadowQuerySchema = z.strictObject({ shadowVersion: versionParamSchema.optional() });

/** Body of `POST /publish-cutoff`. */
export const publishCutoffSchema = z
  .strictObject({
    fromVersion: versionParamSchema.describe("The live version the admin looked at; refused when another version went live meanwhile."),
    cutoffMahalanobisSq: z
      .number()
      .refine((v) => Number.isFinite(v) && v >= 0 && v <= 1e7, { error: "must be a finite squared distance from 0 to 10000000" })
      .describe("The new cutoff on d² (flag when d² > cutoff)."),
    flagRate: z
      .number()
      .min(0, { error: "must be a share from 0 to 1" })
      .max(1, { error: "must be a share from 0 to 1" })
      .nullable()
      .describe("Expected share of payments flagged at the new cutoff (from the operating table), or null."),
    basis: z.enum(["manual", "f1", "capacity", "cost"]).default("manual").describe("How the cutoff was chosen."),
    reason: z
      .string()
      .trim()
      .min(3, { error: "must say why in 3 to 500 characters" })
      .max(500, { error: "must say why in 3 to 500 characters" })
      .describe("Why, for the audit log."),
    confirm: z.literal("publish", { error: 'must be the string "publish" (the confirmation step)' }).describe('Explicit confirmation: the literal string "publish".'),
  })
  .describe("A retuned cutoff to publish as a new version and make live.");

/** Body of `POST /publish-cutoff` as sent (`basis` may be left out). */
export type PublishCutoffRequest = z.input<typeof publishCutoffSchema>;

// ---------------------------------------------------------------------------------------------
// Figures of the model core, on the wire
// ---------------------------------------------------------------------------------------------

/** One row of the drift table (shared with `isodense drift`). */
export const driftEntrySchema = z.strictObject({
  name: z.string().describe("Model column, or `mahalanobisSq` for the score."),
  psi: z.number().nullable().describe("Population stability index against the training shares."),
  level: z.enum(["stable", "watch", "shifted"]).nullable(),
  payments: z.number().int().describe("Payments behind the figure."),
  note: z.string().nullable(),
});
/** One row of the drift table. */
export type DriftEntry = z.output<typeof driftEntrySchema>;

/** A day's flag rate against the expected rate (Wilson score interval). */
export const flagRateCheckSchema = z.strictObject({
  flagged: z.number().int(),
  scored: z.number().int(),
  observedRate: z.number(),
  expectedRate: z.number(),
  confidence: z.number().describe("Two-sided confidence of this interval (after any correction for several tests)."),
  low: z.number(),
  high: z.number(),
  verdict: z.enum(["as-expected", "above", "below"]).describe('"above" / "below" when the expected rate lies outside the interval.'),
});

/** The labelled set's operating point at one cutoff (weighted counts). */
export const operatingPointSchema = z.strictObject({
  mahalanobisSq: z.number().describe("Flag when d² > this."),
  lowestFlagged: z.number().nullable().describe("Lowest labelled d² that is flagged here, or null when nothing is."),
  flaggedRows: z.number().int(),
  truePositives: z.number(),
  falsePositives: z.number(),
  falseNegatives: z.number(),
  trueNegatives: z.number(),
  precision: z.number().nullable().describe("TP / (TP + FP); null when nothing is flagged."),
  recall: z.number(),
  f1: z.number(),
  flagRate: z.number().describe("(TP + FP) / total weight: the expected share of payments flagged."),
});

/** A share estimated for all traffic, with its interval; nulls where it cannot be estimated. */
export const estimateSchema = z.strictObject({
  value: z.number().nullable(),
  standardError: z.number().nullable(),
  low: z.number().nullable(),
  high: z.number().nullable(),
  exact: z.boolean(),
});

/** Horvitz–Thompson estimates for all traffic from the weighted labels. */
export const rateEstimatesSchema = z.strictObject({
  totalPayments: z.number(),
  totalPaymentsSource: z.enum(["given", "estimated"]),
  labelled: z.number().int(),
  labelledFraud: z.number().int(),
  auditFrauds: z.number().int(),
  effectiveAuditFrauds: z.number(),
  estimatedFrauds: z.number(),
  estimatedFlags: z.number(),
  prevalence: estimateSchema,
  recall: estimateSchema,
  precision: estimateSchema,
  future: z.strictObject({ recall: estimateSchema, precision: estimateSchema }).describe("The same rule on future traffic (wider than this period's)."),
  confidence: z.number(),
  tooFewLabels: z.boolean(),
  reasons: z.array(z.string()),
});

// ---------------------------------------------------------------------------------------------
// Answers
// ---------------------------------------------------------------------------------------------

/** Scored and flagged payments of one UTC day. */
export const dayVolumeSchema = z.strictObject({ day: z.string(), scored: z.number().int(), flagged: z.number().int() });
/** Scored and flagged payments of one UTC day. */
export type DayVolume = z.output<typeof dayVolumeSchema>;

/** A day's volumes with its observed rate and the check against the expected rate (null when unknown). */
export const dayFlagRateSchema = dayVolumeSchema.extend({ rate: z.number().nullable(), check: flagRateCheckSchema.nullable() });
/** A day's volumes with its flag rate and check. */
export type DayFlagRate = z.output<typeof dayFlagRateSchema>;

const decisionTally = z.strictObject({ fraud: z.number().int(), legitimate: z.number().int(), open: z.number().int() });
/** Decision counts of a version by how the payment was selected and what was decided. */
export const labelCountsSchema = z.strictObject({ flagged: decisionTally, audit: decisionTally });
/** Decision counts of a version. */
export type LabelCounts = z.output<typeof labelCountsSchema>;

/** The stored weekly report (JSON in `model_reports.report_json`). */
export const weeklyReportSchema = z.strictObject({
  status: z.literal("ok"),
  modelVersion: z.string(),
  shadowVersion: z.string().nullable(),
  createdAt: isoTime,
  window: z.strictObject({ fromDay: z.string(), toDay: z.string(), payments: z.number().int() }),
  drift: z.array(driftEntrySchema),
  flagRates: z.array(dayFlagRateSchema),
  expectedFlagRate: z.number().nullable(),
  labels: z.strictObject({ since: isoTime.nullable(), counts: labelCountsSchema }),
  ageDays: z.number(),
  refitAfterDays: z.number(),
  refitDue: z.boolean(),
  reasons: z.array(z.string()),
  shadowWait: z
    .strictObject({ version: z.string(), since: isoTime.nullable(), days: z.number().nullable(), limitDays: z.number(), overdue: z.boolean() })
    .nullable()
    .optional()
    .describe("The shadow and how long it has waited for a person's decision (null without a shadow; absent in reports stored before it was kept)."),
});
/** The stored weekly report. */
export type WeeklyReport = z.output<typeof weeklyReportSchema>;

/** A weekly report that could not be computed. */
export const failedReportSchema = z.strictObject({ status: z.literal("error"), createdAt: isoTime, modelVersion: z.string().nullable(), error: z.string() });
/** A weekly report that could not be computed. */
export type FailedReport = z.output<typeof failedReportSchema>;

const artifactShape = modelArtifactSchema.shape;

/** One version as the model page shows it (fit report and diagnostics; never the matrices). */
export const versionSummarySchema = z.strictObject({
  version: z.string(),
  createdAt: isoTime,
  estimator: artifactShape.estimator,
  covarianceShape: artifactShape.covarianceShape,
  shapeReason: z.string(),
  columns: z.array(z.string()),
  features: z.array(z.strictObject({ name: z.string(), transform: z.string() })),
  segmentBy: z.string().nullable(),
  segments: z.array(z.strictObject({ key: z.string(), rows: z.number().int() })).describe("Fitted segments with the rows each was fitted on."),
  segmentFallbacks: z.record(z.string(), z.string()),
  cutoff: artifactShape.cutoff,
  training: artifactShape.training,
  diagnostics: artifactShape.diagnostics,
  refitDue: z
    .strictObject({ markedAt: isoTime, reasons: z.array(z.string()) })
    .nullable()
    .describe("Set when a weekly report marked this version due for refit."),
});
/** One version as the model page shows it. */
export type VersionSummary = z.output<typeof versionSummarySchema>;

/** Figures at one cutoff. */
export const cutoffFiguresSchema = z.strictObject({
  cutoffMahalanobisSq: z.number(),
  point: operatingPointSchema.describe("The labelled set's operating point (weighted counts)."),
  estimates: rateEstimatesSchema.describe("Estimates for all traffic, with intervals and the too-few-labels verdict."),
  expectedFlagsPerDay: z.number().nullable().describe("point.flagRate × scored payments per day; null without counted traffic."),
});
/** Figures at one cutoff. */
export type CutoffFigures = z.output<typeof cutoffFiguresSchema>;

/** Counts and rates of one (live, shadow) pair on the traffic both scored. */
export const shadowComparisonSchema = z.strictObject({
  liveVersion: z.string(),
  shadowVersion: z.string(),
  payments: z.number().int().describe("Payments scored by both."),
  liveFlags: z.number().int(),
  shadowFlags: z.number().int(),
  bothFlags: z.number().int().describe("Flagged by both."),
  liveFlagRate: z.number().nullable().describe("Share flagged by the live model (null without payments)."),
  shadowFlagRate: z.number().nullable(),
  agreement: z.number().nullable().describe("Share of payments on which both made the same call (flag or pass)."),
  flagOverlap: z.number().nullable().describe("Flagged by both / flagged by either (Jaccard index of the flag sets; null when neither flagged)."),
  firstScoredAt: isoTime.nullable(),
  lastScoredAt: isoTime.nullable(),
  days: z
    .array(z.strictObject({ day: z.string(), payments: z.number().int(), liveFlags: z.number().int(), shadowFlags: z.number().int(), bothFlags: z.number().int() }))
    .describe("The same counts per UTC day, oldest first."),
});
/** Counts and rates of one (live, shadow) pair. */
export type ShadowComparison = z.output<typeof shadowComparisonSchema>;

/** What a successful publish answers (201). */
export const publishedCutoffSchema = z
  .strictObject({
    version: z.string(),
    fromVersion: z.string(),
    cutoff: z.strictObject({
      fromMahalanobisSq: z.number(),
      toMahalanobisSq: z.number(),
      tailProbability: z.number(),
      flagRate: z.number().nullable(),
      basis: z.string(),
    }),
    pointer: modelPointerSchema,
    publishedBy: z.string(),
  })
  .describe("The new version and the pointer that makes it live.");
/** What a successful publish answers. */
export type PublishedCutoff = z.output<typeof publishedCutoffSchema>;

/** One row of `model_events`. */
export const modelEventRowSchema = z.strictObject({
  id: z.number().int(),
  at: isoTime,
  actor: z.string(),
  action: z.string(),
  fromVersion: z.string().nullable(),
  toVersion: z.string().nullable(),
  outcome: z.enum(["applied", "failed"]),
  detail: z.string().nullable(),
});
/** One row of `model_events`. */
export type ModelEventRow = z.output<typeof modelEventRowSchema>;

/** The latest stored weekly report. */
export const storedReportSchema = z.strictObject({
  id: z.number().int(),
  createdAt: isoTime,
  runBy: z.string(),
  status: z.enum(["ok", "error"]),
  body: z.union([weeklyReportSchema, failedReportSchema]),
});
/** The latest stored weekly report. */
export type StoredReport = z.output<typeof storedReportSchema>;

/** A renew report as filed with the service (`renew_reports`). */
export const storedRenewReportSchema = z.strictObject({ id: z.number().int(), filedAt: isoTime, filedBy: z.string(), report: renewReportSchema });
/** A renew report as filed with the service. */
export type StoredRenewReport = z.output<typeof storedRenewReportSchema>;

/** A payment on which live and shadow made different calls. */
export const disagreementSchema = z.strictObject({
  transactionId: z.string(),
  scoredAt: isoTime,
  liveFlagged: z.boolean(),
  shadowFlagged: z.boolean(),
  liveMahalanobisSq: z.number(),
  shadowMahalanobisSq: z.number(),
});
/** A payment on which live and shadow made different calls. */
export type Disagreement = z.output<typeof disagreementSchema>;

/** `GET /v1/insights/model`. */
export const modelPageSchema = z
  .strictObject({
    pointer: modelPointerSchema,
    active: versionSummarySchema,
    shadow: versionSummarySchema.nullable(),
    renew: z
      .strictObject({ shadow: storedRenewReportSchema.nullable(), held: storedRenewReportSchema.nullable() })
      .describe("The renew report that published the shadow, and the latest held-back candidate filed after it."),
    shadowSince: isoTime.nullable().describe("When the shadow was set (its latest applied shadow-set event); null without a shadow."),
    report: storedReportSchema.nullable(),
    drift: z.strictObject({ fromDay: z.string(), toDay: z.string(), payments: z.number().int(), rows: z.array(driftEntrySchema) }),
    dailyFlags: z.array(dayFlagRateSchema),
    events: z.array(modelEventRowSchema).describe("The newest model events (at most 10), newest first."),
  })
  .describe("The model page: live and shadow versions, the latest weekly report, drift, daily flag rates and model events.");
/** `GET /v1/insights/model`. */
export type ModelPageData = z.output<typeof modelPageSchema>;

/** `GET /v1/insights/operating`. */
export const operatingSchema = z
  .strictObject({
    version: z.string(),
    labelVersions: z.array(z.string()).describe("Versions whose decisions are used: this one and earlier live ones with the same parameters."),
    columns: z.number().int().describe("Model columns: the degrees of freedom of d² under the model."),
    cutoff: artifactShape.cutoff,
    labels: z
      .strictObject({
        mahalanobisSq: z.array(z.number()),
        fraud: z.array(z.number()),
        weight: z.array(z.number()),
        flagged: z.array(z.number()),
        labelled: z.number().int(),
        fraudCount: z.number().int(),
        undecided: z.number().int(),
        heldBack: z.number().int(),
      })
      .describe(
        "Decided review items of fully decided (version, UTC day) cells (parallel arrays) and counts: `undecided` items still wait, and `heldBack` decisions share a day with them, so they are left out until that day is finished.",
      ),
    traffic: z.strictObject({
      days: z.number().int(),
      daysWithTraffic: z.number().int(),
      scored: z.number().int(),
      flagged: z.number().int(),
      scoredPerDay: z.number().nullable(),
    }),
    atCutoff: cutoffFiguresSchema.nullable(),
    unavailable: z.string().nullable().describe("Why `atCutoff` could not be computed, in plain words."),
  })
  .describe("The labelled operating table of a version and, with ?cutoff=, the figures there.");
/** `GET /v1/insights/operating`. */
export type OperatingData = z.output<typeof operatingSchema>;

/** `GET /v1/insights/shadow`. */
export const shadowDataSchema = z
  .strictObject({
    pointer: modelPointerSchema,
    comparison: shadowComparisonSchema.nullable(),
    disagreements: z.array(disagreementSchema).describe("The latest payments flagged by one model only, newest first (at most 20)."),
  })
  .describe("Live against shadow on the traffic so far.");
/** `GET /v1/insights/shadow`. */
export type ShadowData = z.output<typeof shadowDataSchema>;

/** `GET /v1/insights/histogram`. */
export const histogramSchema = z
  .strictObject({
    version: z.string(),
    days: z.number().int(),
    edges: z.array(z.number()).describe("The model's reference d² edges (training deciles)."),
    counts: z.array(z.number().int()).describe("Payments per bucket (edges + 1)."),
    payments: z.number().int(),
    expectedShare: z.number().describe("Share of training traffic each bucket held."),
    cutoffMahalanobisSq: z.number(),
  })
  .describe("Score histogram of recent traffic against the training buckets.");
/** `GET /v1/insights/histogram`. */
export type HistogramData = z.output<typeof histogramSchema>;
