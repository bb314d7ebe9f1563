/**
 * The payment flow's contract: `POST /v1/score`, `POST /v1/score/batch` and the `POST /v1/echo`
 * baseline. The score request schema runs on every payment (scoring/score-payment.ts), so it stays
 * flat: a strict object of plain checks, the features object passed on untouched for the model's
 * own checks.
 */
import { z } from "zod";
import { errorSchema, identifierText, jsonValueSchema, problemSchema } from "./wire";

/** A plain JSON object (not an array, not null), passed on untouched; `rule` is the error's wording. */
function plainObject(rule: string) {
  return z.custom<Record<string, unknown>>((value) => typeof value === "object" && value !== null && !Array.isArray(value), { error: rule });
}

/** Body of `POST /v1/score` and one item of a batch. Unknown keys are refused. */
export const scoreRequestSchema = z
  .strictObject({
    transactionId: identifierText(128).describe("The payment flow's id of the payment; the idempotency key together with the model version."),
    features: plainObject("must be an object keyed by feature name")
      .optional()
      .describe(
        "Raw feature values keyed by feature name, numbers only; the names are those of the active model (GET /v1/health, GET /v1/models/{version}). Send either features or payment.",
      ),
    payment: plainObject("must be an object keyed by ledger column name")
      .optional()
      .describe(
        "A payment record instead of ready features: the ledger columns the live model's record spec reads (GET /v1/health lists them as paymentFields), keyed by column name. The account's history features are derived at the edge and the payment is recorded in it; the answer carries them as `derived`. The id column may be left out (it is the transactionId); segment and accountRef come from the record.",
      ),
    segment: identifierText(64).optional().describe("Value of the model's segment column (e.g. the sales channel); unknown or small segments score with the pooled model."),
    accountRef: identifierText(128).optional().describe("Pseudonymous account id for the review history. Never a card number or a name."),
  })
  .describe("One card-not-present payment to score.");

/** A score request that passed the schema (the model's own checks come after). */
export type ScoreRequest = z.output<typeof scoreRequestSchema>;

/** A reason as it travels: non-finite numbers of the model core are sent as null ("no finite bound"). */
export const wireReasonSchema = z.strictObject({
  feature: z.string(),
  actual: z.number().describe("The raw value received."),
  expected: z
    .strictObject({
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

/** A reason with every non-finite number replaced by null. */
export type WireReason = z.output<typeof wireReasonSchema>;

/** Answer of `POST /v1/score`. */
export const scoreAnswerSchema = z
  .strictObject({
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
    cutoff: z.strictObject({ mahalanobisSq: z.number(), tailProbability: z.number(), logDensity: z.number() }),
    modelVersion: z.string(),
    segment: z.string().describe("Segment key that scored the payment (`*` = pooled model)."),
    reasons: z
      .array(wireReasonSchema)
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
export type ScoreAnswer = z.output<typeof scoreAnswerSchema>;

/** Body of `POST /v1/score/batch`; the item count limit is MAX_BATCH, checked by the route. */
export const batchRequestSchema = z
  .strictObject({
    payments: z.array(z.unknown()).describe("Payments, each shaped like the body of POST /v1/score; at most MAX_BATCH (100 by default)."),
  })
  .describe("Several payments scored in one call; each is answered or refused on its own.");

/** One payment of a batch refused: what it would have been answered alone. */
const refusedItemSchema = z.strictObject({
  index: z.number().int(),
  outcome: z.literal("refused"),
  status: z.union([z.literal(400), z.literal(409), z.literal(503)]).describe("The status this payment would have had alone."),
  error: errorSchema.shape.error,
  problems: z.array(problemSchema),
  retryable: z.boolean().optional().describe("On 503: the same request may be sent again."),
});

/** How one payment of a batch ended: its answer, or the refusal it would have had alone. */
export const batchItemSchema = z.discriminatedUnion("outcome", [
  z.strictObject({ index: z.number().int(), outcome: z.literal("scored"), result: scoreAnswerSchema }),
  refusedItemSchema,
]);

/** How one payment ended (one entry of a batch answer). */
export type BatchItem = z.output<typeof batchItemSchema>;

/** Answer of `POST /v1/score/batch`. */
export const batchAnswerSchema = z
  .strictObject({
    modelVersion: z.string(),
    results: z.array(batchItemSchema).describe("One entry per payment, in the order sent."),
    counts: z.strictObject({ scored: z.number().int(), refused: z.number().int(), review: z.number().int(), auditSample: z.number().int() }),
  })
  .describe("Every payment of a batch, scored or refused on its own.");

/** Answer of `POST /v1/score/batch`. */
export type BatchAnswer = z.output<typeof batchAnswerSchema>;

/** Body and answer of `POST /v1/echo`: any JSON value, answered as parsed. */
export const echoSchema = jsonValueSchema.describe("Any JSON value; the answer is the body as parsed.");

/** Body and answer of `POST /v1/echo`. */
export type EchoBody = z.output<typeof echoSchema>;
