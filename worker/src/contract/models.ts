/**
 * The admin contract for models in KV (`/v1/models…`) and the public health answer.
 */
import { z } from "zod";
import { modelArtifactSchema } from "../../../shared-model/src/artifact";
import { isoTime, modelPointerSchema } from "./wire";

/** Body of `PUT /v1/models/shadow`. */
export const shadowRequestSchema = z
  .strictObject({
    version: z.string().min(1).max(200).nullable().describe("Version to score in shadow, or null to stop."),
  })
  .describe("Sets or clears the shadow model.");

/** Body of `PUT /v1/models/shadow`. */
export type ShadowRequest = z.input<typeof shadowRequestSchema>;

/** Answer of activate, rollback and shadow: the pointer after the call, and whether it changed. */
export const pointerChangeSchema = z
  .strictObject({
    pointer: modelPointerSchema,
    changed: z.boolean().describe("False when the pointer already said so (nothing was written)."),
  })
  .describe("The active-model pointer after the change.");

/** Answer of activate, rollback and shadow. */
export type PointerChange = z.output<typeof pointerChangeSchema>;

/** Answer of `POST /v1/models`: 201 stored, or 200 when the identical artifact was stored before. */
export const uploadAnswerSchema = z
  .union([
    z.strictObject({ version: z.string(), stored: z.literal(true), identical: z.literal(false), uploadedBy: z.string() }),
    z.strictObject({ version: z.string(), stored: z.literal(false), identical: z.literal(true) }),
  ])
  .describe("Whether the artifact was stored now or already held with the same checksum.");

/** Answer of `POST /v1/models`. */
export type UploadAnswer = z.output<typeof uploadAnswerSchema>;

/** Answer of `POST /v1/models/{version}/renew-report`: 201 filed, 200 when this candidate's report with this outcome was filed before. */
export const renewFilingSchema = z
  .strictObject({ version: z.string(), outcome: z.enum(["published", "held"]), filed: z.boolean().describe("False when the same report was already filed.") })
  .describe("The renew report filed beside its candidate.");

/** Answer of `POST /v1/models/{version}/renew-report`. */
export type RenewFiling = z.output<typeof renewFilingSchema>;

/** Answer of `GET /v1/models/{version}`. */
export const storedModelSchema = z
  .strictObject({
    version: z.string(),
    active: z.boolean(),
    shadow: z.boolean(),
    artifact: modelArtifactSchema.describe("The artifact as uploaded."),
  })
  .describe("One stored artifact and whether it scores live or in shadow.");

/** Answer of `GET /v1/models/{version}`. */
export type StoredModel = z.output<typeof storedModelSchema>;

/** One stored version in `GET /v1/models`. */
export const modelSummarySchema = z.strictObject({
  version: z.string(),
  createdAt: isoTime,
  estimator: z.string(),
  covarianceShape: z.string(),
  columns: z.array(z.string()),
  features: z.array(z.strictObject({ name: z.string(), transform: z.string() })),
  segmentBy: z.string().nullable(),
  segments: z.array(z.string()),
  cutoff: z
    .strictObject({ mahalanobisSq: z.number().nullable(), tailProbability: z.number().nullable(), basis: z.string(), flagRate: z.number().nullable() })
    .describe("As stored; null (and empty strings elsewhere) where a stored artifact lacks the field."),
  checksum: z.string(),
  active: z.boolean(),
  shadow: z.boolean(),
});

/** One stored version in `GET /v1/models`. */
export type ModelSummary = z.output<typeof modelSummarySchema>;

/** Answer of `GET /v1/models`. */
export const modelListSchema = z
  .strictObject({
    pointer: modelPointerSchema.nullable(),
    models: z.array(modelSummarySchema),
    cursor: z.string().nullable().describe("Pass as ?cursor= for the next page; null on the last page."),
  })
  .describe("A page of stored versions with the pointer.");

/** Answer of `GET /v1/models`. */
export type ModelList = z.output<typeof modelListSchema>;

/** Answer of `GET /v1/health` (200 with a model, 503 without). */
export const healthSchema = z
  .strictObject({
    status: z.enum(["ready", "no-model"]),
    model: z
      .strictObject({
        version: z.string(),
        loadedAt: isoTime,
        features: z.array(z.string()).describe("Feature names a score request must carry."),
        segmentBy: z.string().nullable(),
        paymentFields: z
          .array(z.string())
          .nullable()
          .describe("Ledger columns a `payment` record may carry (id, time, account, segment, then the columns derivations read); null when the model reads ready features only."),
      })
      .nullable(),
    shadow: z.strictObject({ version: z.string(), loadedAt: isoTime }).nullable(),
    pointer: z.strictObject({ version: z.string(), shadow: z.string().nullable() }).nullable(),
    refreshSeconds: z.number(),
    lastCheckedAt: isoTime.nullable(),
    loadFailures: z.number().int(),
    shadowLoadFailures: z.number().int(),
    lastFailure: z.strictObject({ code: z.string(), message: z.string(), at: isoTime }).nullable(),
    counters: z
      .strictObject({
        shadowSkipped: z.number().int().describe("Payments not scored in shadow: the shadow needs a feature the request lacks, or refuses a value."),
        shadowSendFailures: z.number().int().describe("Shadow comparisons that could not be enqueued."),
        handoffSendFailures: z.number().int().describe("Review hand-offs that could not be enqueued (the payment was answered 503, retryable)."),
        idempotencyUnavailable: z.number().int().describe("Payments scored without the durable idempotency check because its store could not be reached."),
        conflictSendFailures: z.number().int().describe("Conflicting repeats whose record could not be enqueued for the analysts."),
      })
      .describe("Per-isolate counts of degradations that did not fail a request."),
  })
  .describe("Whether a model is loaded, which one, and how loading has gone.");

/** Answer of `GET /v1/health`. */
export type Health = z.output<typeof healthSchema>;
