/**
 * zod schemas of the HTTP API: requests are validated with them, and `/openapi.json` is generated
 * from them (zod 4 `z.toJSONSchema`), so the document cannot drift from what the routes accept.
 */
import { z } from "zod";

/** Printable ASCII without spaces or control characters (0x21–0x7E). */
const PRINTABLE = /^[\x21-\x7e]+$/;

/** A plain JSON object (not an array, not null). The routes pass the object itself on untouched. */
const plainObject = z.custom<Record<string, unknown>>((value) => typeof value === "object" && value !== null && !Array.isArray(value), {
  error: "must be an object keyed by feature name",
});

/** A plain JSON object holding a payment record's fields. */
const plainPaymentObject = z.custom<Record<string, unknown>>((value) => typeof value === "object" && value !== null && !Array.isArray(value), {
  error: "must be an object keyed by ledger column name",
});

/** Body of `POST /v1/score` and one item of a batch. Unknown keys are refused. */
export const scoreRequestSchema = z
  .strictObject({
    transactionId: z
      .string()
      .min(1, { error: "must be 1 to 128 characters" })
      .max(128, { error: "must be 1 to 128 characters" })
      .regex(PRINTABLE, { error: "must be printable ASCII without spaces (0x21–0x7E)" })
      .describe("The payment flow's id of the payment; the idempotency key together with the model version."),
    features: plainObject
      .optional()
      .describe(
        "Raw feature values keyed by feature name, numbers only; the names are those of the active model (GET /v1/health, GET /v1/models/{version}). Send either features or payment.",
      ),
    payment: plainPaymentObject
      .optional()
      .describe(
        "A payment record instead of ready features: the ledger columns the live model's record spec reads (GET /v1/health lists them as paymentFields), keyed by column name. The account's history features are derived at the edge and the payment is recorded in it; the answer carries them as `derived`. The id column may be left out (it is the transactionId); segment and accountRef come from the record.",
      ),
    segment: z
      .string()
      .min(1, { error: "must be 1 to 64 characters" })
      .max(64, { error: "must be 1 to 64 characters" })
      .regex(PRINTABLE, { error: "must be printable ASCII without spaces (0x21–0x7E)" })
      .optional()
      .describe("Value of the model's segment column (e.g. the sales channel); unknown or small segments score with the pooled model."),
    accountRef: z
      .string()
      .min(1, { error: "must be 1 to 128 characters" })
      .max(128, { error: "must be 1 to 128 characters" })
      .regex(PRINTABLE, { error: "must be printable ASCII without spaces (0x21–0x7E)" })
      .optional()
      .describe("Pseudonymous account id for the review history. Never a card number or a name."),
  })
  .describe("One card-not-present payment to score.");

/** Top-level keys a score request accepts (for unknown-key errors). */
export const SCORE_REQUEST_KEYS = ["transactionId", "features", "payment", "segment", "accountRef"] as const;

const reasonSchema = z.object({
  feature: z.string(),
  actual: z.number().describe("The raw value received."),
  expected: z
    .object({
      center: z.number().nullable(),
      low: z.number().nullable(),
      high: z.number().nullable(),
      outsideTraining: z
        .enum(["below", "above"])
        .optional()
        .describe("Present when the whole range lies below or above every value seen in training; low, center and high are then that end."),
    })
    .describe(
      "Expected value and central 95 % range given all the other features, in the feature's own units; null where the range has no finite bound in those units (the inverse transform runs to infinity).",
    ),
  standardizedResidual: z.number().nullable().describe("(x − E[x | rest]) / sd(x | rest) in model units."),
});

/** Answer of `POST /v1/score`. */
export const scoreAnswerSchema = z
  .object({
    transactionId: z.string(),
    decision: z.enum(["review", "pass"]).describe("`review`: beyond the cutoff, sent to human review. isodense never declines."),
    logDensity: z.number().describe("Natural-log density under the segment's Gaussian."),
    mahalanobisSq: z.number().describe("Squared Mahalanobis distance d²."),
    tailProbability: z
      .number()
      .describe(
        "P(D > d²) for a new payment, comparable across segments and models: P(χ²ₙ > d²), or for a small segment whose cutoff read the predictive law (the model's `tailLaw`), P(n(m + 1)/(m − n)·F(n, m − n) > d²); 0 once it underflows a double.",
      ),
    log10TailProbability: z
      .number()
      .describe("log₁₀ of `tailProbability` from the log of the incomplete gamma (or beta) function: finite where `tailProbability` underflows; sort by this."),
    cutoff: z.object({ mahalanobisSq: z.number(), tailProbability: z.number(), logDensity: z.number() }),
    modelVersion: z.string(),
    segment: z.string().describe("Segment key that scored the payment (`*` = pooled model)."),
    reasons: z
      .array(reasonSchema)
      .describe(
        "Features whose conditional residuals are least likely, rarest first (by the tail probability of the residual, so one- and two-column features rank on one scale).",
      ),
    auditSample: z.boolean().describe("True when a passing payment was also sent to review as part of the audit sample."),
    derived: z
      .record(z.string(), z.number())
      .optional()
      .describe("Payment form only: each feature's raw value as derived from the payment and the account's earlier payments, by feature name."),
  })
  .describe("Score of one payment.");

/** Answer of `POST /v1/score`. */
export type ScoreAnswer = z.infer<typeof scoreAnswerSchema>;

/** Body of `POST /v1/score/batch`; the item count limit is MAX_BATCH, checked by the route. */
export const batchRequestSchema = z
  .strictObject({
    payments: z.array(z.unknown()).describe("Payments, each shaped like the body of POST /v1/score; at most MAX_BATCH (100 by default)."),
  })
  .describe("Several payments scored in one call; each is answered or refused on its own.");

/** Problem: the field and the rule it broke. */
export const problemSchema = z.object({
  field: z.string().describe("Dotted path (`features.amount`, `payments[3].transactionId`), header or variable name."),
  rule: z.string().describe("The rule, with what was expected and what came."),
});

/** Every error answer. */
export const errorSchema = z
  .object({
    error: z.string().describe("Stable code, e.g. invalid-request, unauthorized, no-model."),
    problems: z.array(problemSchema),
    retryable: z.boolean().optional().describe("On 503: the same request may be retried."),
  })
  .describe("Error answer.");

/** One item of a batch answer. */
export const batchItemSchema = z.discriminatedUnion("outcome", [
  z.object({ index: z.number().int(), outcome: z.literal("scored"), result: scoreAnswerSchema }),
  z.object({
    index: z.number().int(),
    outcome: z.literal("refused"),
    status: z.number().int().describe("The status this payment would have had alone: 400, 409 or 503."),
    error: z.string(),
    problems: z.array(problemSchema),
    retryable: z.boolean().optional(),
  }),
]);

/** Answer of `POST /v1/score/batch`. */
export const batchAnswerSchema = z.object({
  modelVersion: z.string(),
  results: z.array(batchItemSchema).describe("One entry per payment, in the order sent."),
  counts: z.object({ scored: z.number().int(), refused: z.number().int(), review: z.number().int(), auditSample: z.number().int() }),
});

/** Body of `PUT /v1/models/shadow`. */
export const shadowRequestSchema = z
  .strictObject({
    version: z.string().min(1).max(200).nullable().describe("Version to score in shadow, or null to stop."),
  })
  .describe("Sets or clears the shadow model.");

/** Version in a path: printable ASCII without spaces or slashes, up to 200 characters. */
export const versionParamSchema = z
  .string()
  .min(1, { error: "must be 1 to 200 characters" })
  .max(200, { error: "must be 1 to 200 characters" })
  .regex(/^[\x21-\x2e\x30-\x7e]+$/, { error: "must be printable ASCII without spaces or slashes" });

/** The active-model pointer as returned by the admin routes. */
export const pointerAnswerSchema = z.object({
  version: z.string(),
  shadow: z.string().nullable(),
  previous: z.array(z.string()),
  updatedAt: z.string(),
  updatedBy: z.string(),
});

/** One stored version in `GET /v1/models`. */
export const modelSummarySchema = z.object({
  version: z.string(),
  createdAt: z.string(),
  estimator: z.string(),
  covarianceShape: z.string(),
  columns: z.array(z.string()),
  features: z.array(z.object({ name: z.string(), transform: z.string() })),
  segmentBy: z.string().nullable(),
  segments: z.array(z.string()),
  cutoff: z.object({ mahalanobisSq: z.number(), tailProbability: z.number(), basis: z.string(), flagRate: z.number().nullable() }),
  checksum: z.string(),
  active: z.boolean(),
  shadow: z.boolean(),
});

/** Answer of `GET /v1/models`. */
export const modelListSchema = z.object({
  pointer: pointerAnswerSchema.nullable(),
  models: z.array(modelSummarySchema),
  cursor: z.string().nullable().describe("Pass as ?cursor= for the next page; null on the last page."),
});

/** Answer of `GET /v1/health`. */
export const healthSchema = z.object({
  status: z.enum(["ready", "no-model"]),
  model: z
    .object({
      version: z.string(),
      loadedAt: z.string(),
      features: z.array(z.string()).describe("Feature names a score request must carry."),
      segmentBy: z.string().nullable(),
      paymentFields: z
        .array(z.string())
        .nullable()
        .describe("Ledger columns a `payment` record may carry (id, time, account, segment, then the columns derivations read); null when the model reads ready features only."),
    })
    .nullable(),
  shadow: z.object({ version: z.string(), loadedAt: z.string() }).nullable(),
  pointer: z.object({ version: z.string(), shadow: z.string().nullable() }).nullable(),
  refreshSeconds: z.number(),
  lastCheckedAt: z.string().nullable(),
  loadFailures: z.number().int(),
  shadowLoadFailures: z.number().int(),
  lastFailure: z.object({ code: z.string(), message: z.string(), at: z.string() }).nullable(),
  counters: z
    .object({ shadowSkipped: z.number().int(), shadowSendFailures: z.number().int(), handoffSendFailures: z.number().int() })
    .describe("Per-isolate counts of degradations that did not fail a request."),
});

/** An account reference in a path: printable ASCII without spaces, 1 to 128 characters. */
export const accountRefParamSchema = z
  .string()
  .min(1, { error: "must be 1 to 128 characters" })
  .max(128, { error: "must be 1 to 128 characters" })
  .regex(PRINTABLE, { error: "must be printable ASCII without spaces (0x21–0x7E)" });

/** Answer of `DELETE /v1/accounts/{accountRef}/history`. */
export const erasureAnswerSchema = z
  .object({
    eventId: z.number().int().describe("Row of the erasure log (erasure_events), which keeps only a SHA-256 digest of the account reference."),
    at: z.string(),
    erased: z
      .record(z.string(), z.record(z.string(), z.number()))
      .describe(
        "Per store erased (`review-store`: items, notes, auditEvents, paymentConflicts, shadowScores, labelsInFinishedExports; `account-history`: keptPayments, foldedPayments), counts of what went; never the data.",
      ),
    outsideIsodense: z
      .string()
      .optional()
      .describe("Present when some of the account's labels left isodense in label exports taken before: those copies must be erased where they are."),
  })
  .describe("An account's data erased on request.");
