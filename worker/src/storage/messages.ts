/**
 * Messages on the hand-off queue (`isodense-flags`): what the request path sends and the consumer
 * writes to D1. Both sides share these schemas, and the consumer re-validates every body, so a
 * message from an older or newer deployment that does not fit is never half-written.
 */
import { z } from "zod";
import { countsMessageSchema, type CountsMessage } from "../insights/counts-message";

const finite = z.number().refine(Number.isFinite, "must be finite");

/** A payment for the review store: flagged (beyond the cutoff) or drawn into the audit sample. */
export const reviewMessageSchema = z.object({
  kind: z.literal("review"),
  transactionId: z.string().min(1).max(128),
  modelVersion: z.string().min(1),
  /** Segment key that scored it (`*` = pooled). */
  segment: z.string().min(1),
  accountRef: z.string().max(128).nullable(),
  /** Raw features as received, feature name → number. */
  features: z.record(z.string(), finite),
  logDensity: finite,
  mahalanobisSq: finite,
  tailProbability: z.number().min(0).max(1),
  /** log10 of the tail probability, finite where it underflows; absent from older deployments' messages. */
  log10TailProbability: finite.pipe(z.number().max(0)).optional(),
  cutoffMahalanobisSq: finite,
  /**
   * Reasons as the answer gave them, stored as JSON text. Deliberately not validated field by
   * field: an explanation quirk (say an unbounded range) must never keep a flag out of review.
   */
  reasons: z.array(z.unknown()).max(64),
  selection: z.enum(["flagged", "audit"]),
  /** 1 when flagged; the audit rate in force when drawn into the audit sample. */
  inclusionProbability: z.number().gt(0).max(1),
  /** ISO-8601 time of scoring. */
  scoredAt: z.string().min(1),
});

/** One payment scored by both the live and the shadow model. */
export const shadowMessageSchema = z.object({
  kind: z.literal("shadow"),
  transactionId: z.string().min(1).max(128),
  liveVersion: z.string().min(1),
  shadowVersion: z.string().min(1),
  liveSegment: z.string().min(1),
  shadowSegment: z.string().min(1),
  liveFlagged: z.boolean(),
  shadowFlagged: z.boolean(),
  liveMahalanobisSq: finite,
  shadowMahalanobisSq: finite,
  liveTailProbability: z.number().min(0).max(1),
  shadowTailProbability: z.number().min(0).max(1),
  scoredAt: z.string().min(1),
});

/**
 * A transaction id sent again, inside the idempotency window, with other content than when first
 * seen: refused with 409 and recorded here for the analysts (the content is the refused one's).
 */
export const conflictMessageSchema = z.object({
  kind: z.literal("conflict"),
  transactionId: z.string().min(1).max(128),
  /** ISO-8601 time the id was first seen. */
  firstSeenAt: z.string().min(1),
  /** ISO-8601 time of the refused repeat. */
  at: z.string().min(1),
  firstContentHash: z.string().min(1).max(128),
  contentHash: z.string().min(1).max(128),
  /** Live model when the repeat came. */
  modelVersion: z.string().min(1),
  segment: z.string().max(64).nullable(),
  accountRef: z.string().max(128).nullable(),
  features: z.record(z.string(), finite),
});

/** Any message on the hand-off queue (traffic counts: `insights/counts-message.ts`). */
export const handoffMessageSchema = z.discriminatedUnion("kind", [reviewMessageSchema, shadowMessageSchema, conflictMessageSchema, countsMessageSchema]);

/** A review-store item in flight. */
export type ReviewMessage = z.infer<typeof reviewMessageSchema>;
/** A shadow comparison in flight. */
export type ShadowMessage = z.infer<typeof shadowMessageSchema>;
/** A conflicting repeat in flight. */
export type ConflictMessage = z.infer<typeof conflictMessageSchema>;
/** Body of a message on `isodense-flags` (and, after five failed deliveries, `isodense-flags-dead`). */
export type HandoffMessage = ReviewMessage | ShadowMessage | ConflictMessage | CountsMessage;
export type { CountsMessage };

/** Production caps one queue message at 128 KB and one `sendBatch` at 256 KB and 100 messages. */
export const QUEUE_LIMITS = { messageBytes: 128_000, batchBytes: 256_000, batchMessages: 100 } as const;
