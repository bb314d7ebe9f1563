/**
 * The aggregated traffic-count message: what one isolate saw for one model version on one UTC day
 * since its last flush. It travels on the hand-off queue beside review items, so counting adds no
 * D1 write to the scoring path (see `tally.ts`).
 */
import { z } from "zod";

const count = z.number().int().min(0).max(Number.MAX_SAFE_INTEGER);

/** Most (segment, name, bucket) entries in one message: ≈ 40 bytes each keeps it far below 128 KB. */
export const MAX_BUCKET_ENTRIES = 2000;

/** Schema of a counts message (the consumer re-validates every body). */
export const countsMessageSchema = z.object({
  kind: z.literal("counts"),
  /** Random id of this flush; the consumer counts a flush id once, however often it is delivered. */
  flushId: z.string().regex(/^[A-Za-z0-9-]{8,64}$/, "must be 8 to 64 letters, digits or dashes"),
  modelVersion: z.string().min(1).max(200),
  /** UTC day the payments were scored, YYYY-MM-DD. */
  day: z.string().regex(/^\d{4}-\d{2}-\d{2}$/, "must be a UTC day YYYY-MM-DD"),
  /** [segment, scored, flagged] per segment (a flush split over several messages sends them once). */
  volumes: z
    .array(z.tuple([z.string().min(1).max(200), count, count]))
    .max(1000)
    .refine((rows) => rows.every(([, scored, flagged]) => flagged <= scored), "flagged must not exceed scored"),
  /** [segment, column name or "mahalanobisSq", bucket, count] for every non-zero bucket. */
  buckets: z.array(z.tuple([z.string().min(1).max(200), z.string().min(1).max(200), z.number().int().min(0).max(255), count])).max(MAX_BUCKET_ENTRIES),
});

/** One flush of traffic counts. */
export type CountsMessage = z.infer<typeof countsMessageSchema>;
