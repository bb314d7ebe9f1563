/**
 * Shapes of the review API (`/v1/review/*`) as they travel over the wire. The worker builds them and
 * the analysts' app imports them as types only, so both sides agree at compile time.
 *
 * Times are ISO-8601 UTC strings; probabilities are in [0, 1]; `mahalanobisSq` is the squared
 * Mahalanobis distance; model-unit values are after the feature transforms of the model version.
 */
import type { FittedFeature, Reason } from "../../../shared-model/src/types";

/** Where an item stands for the team. `claimed` means a live (unexpired) claim and no decision. */
export type ReviewState = "open" | "claimed" | "decided";
/** What an analyst concluded. */
export type Outcome = "fraud" | "legitimate";
/** Why the item is in the queue: beyond the cutoff, or drawn for the random audit sample. */
export type Selection = "flagged" | "audit";
/** Orderings the list supports; each is served by its own index. */
export type SortKey = "priority" | "tail" | "amount" | "age";
export type SortDirection = "asc" | "desc";

/** GET /v1/review/me */
export interface WhoAmI {
  user: string;
  role: "analyst" | "admin";
  /** How long a claim lasts before anyone else may take the item. */
  claimTtlSeconds: number;
  /** How long after a decision its author may undo it. */
  undoWindowSeconds: number;
}

export interface ClaimView {
  by: string;
  until: string;
}

export interface DecisionView {
  outcome: Outcome;
  by: string;
  at: string;
  note: string | null;
}

/** One line of the queue. */
export interface QueueRow {
  id: number;
  transactionId: string;
  modelVersion: string;
  segment: string;
  accountRef: string | null;
  selection: Selection;
  /** P(χ²ₙ > d²); 0 where it underflows a double. */
  tailProbability: number;
  /** log10 of it, finite where it underflows (the "how rare" order sorts by it); null where not known (rows stored before it was kept). */
  log10TailProbability: number | null;
  mahalanobisSq: number;
  /** Raw `amount` feature when the model has one, else null. */
  amount: number | null;
  scoredAt: string;
  /** Priority right now (see docs/review.md for the formula); larger is more urgent. */
  priority: number;
  state: ReviewState;
  claim: ClaimView | null;
  decision: DecisionView | null;
}

export interface StateCounts {
  open: number;
  claimed: number;
  decided: number;
}

/** GET /v1/review/items */
export interface QueuePage {
  items: QueueRow[];
  /** Opaque keyset cursor for the next page, or null on the last page. */
  nextCursor: string | null;
  /** Counts per state under the same filters (state filter aside). */
  counts: StateCounts;
  sort: SortKey;
  direction: SortDirection;
  asOf: string;
}

/** One feature axis of the pair plot: the fitted feature, so the app can map ticks to raw units. */
export interface PairAxis {
  feature: FittedFeature;
  /** Index of the feature's column among the model columns. */
  column: number;
}

/** Evidence for the scatter of the two most unusual single-column features. */
export interface PairEvidence {
  axes: [PairAxis, PairAxis];
  /** Segment whose Gaussian is drawn (`*` is the pooled model). */
  segment: string;
  /** Marginal mean of the two columns, model units. */
  mean: [number, number];
  /** Marginal 2×2 covariance of the two columns (maximum likelihood, ÷ m), model units. */
  covariance: [[number, number], [number, number]];
  /** The payment in model units. */
  point: [number, number];
  /** The payment in raw units. */
  rawPoint: [number, number];
}

export interface HistoryRow {
  id: number;
  transactionId: string;
  scoredAt: string;
  tailProbability: number;
  /** As on {@link QueueRow}. */
  log10TailProbability: number | null;
  amount: number | null;
  selection: Selection;
  state: ReviewState;
  outcome: Outcome | null;
}

export type AuditAction = "claim" | "release" | "decide" | "undo";

/** One row of the append-only audit trail. */
export interface AuditEvent {
  id: number;
  at: string;
  actor: string;
  action: AuditAction;
  fromOutcome: Outcome | null;
  toOutcome: Outcome | null;
  note: string | null;
  modelVersion: string;
}

/**
 * The payment's transaction id sent again, inside the idempotency window, with other content than
 * when first seen; the payment flow was answered 409. The content shown is the refused repeat's.
 */
export interface ConflictView {
  at: string;
  firstSeenAt: string;
  /** Live model when the repeat came. */
  modelVersion: string;
  segment: string | null;
  accountRef: string | null;
  features: Record<string, number>;
}

/** GET /v1/review/items/:id */
export interface ItemDetail {
  item: QueueRow & {
    features: Record<string, number>;
    logDensity: number;
    cutoffMahalanobisSq: number;
    inclusionProbability: number;
    receivedAt: string;
  };
  /** Reasons stored by the scorer when the payment was scored. */
  reasons: Reason[];
  /** Standardized conditional residual of every feature, from the model artifact; null without it. */
  residuals: Reason[] | null;
  pair: PairEvidence | null;
  /** Why `residuals` or `pair` is missing, in plain words; null when both are present. */
  evidenceGap: string | null;
  history: HistoryRow[];
  /** The newest audit events (at most 20), newest first; older ones from GET /v1/review/items/:id/events. */
  events: AuditEvent[];
  /** Every audit event of the item. */
  eventCount: number;
  /** `before` for the next, older page of events, or null when `events` holds them all. */
  eventsNextBefore: number | null;
  /** Repeats of this transaction id with other content (newest first, at most 20). */
  conflicts: ConflictView[];
  /** Whether the caller may still undo their latest decision on this item. */
  undoableUntil: string | null;
}

/** GET /v1/review/items/:id/events: a page of the audit trail, newest first. */
export interface EventPage {
  events: AuditEvent[];
  /** Every audit event of the item. */
  count: number;
  /** `before` for the next, older page, or null on the last page. */
  nextBefore: number | null;
}

/** Result of claim, release, decision and undo: the item's new queue line. */
export interface ActionResult {
  item: QueueRow;
  undoableUntil: string | null;
}

/** GET /v1/review/summary */
export interface DaySummary {
  /** UTC day the figures cover, `YYYY-MM-DD`. */
  day: string;
  decidedToday: number;
  decidedTodayByMe: number;
  open: number;
  claimed: number;
  /** Reviews one analyst can do in a day (var ANALYST_DAILY_CAPACITY). */
  capacityPerAnalyst: number;
}

/** GET /v1/review/facets: values the filters can take. */
export interface Facets {
  segments: string[];
  modelVersions: string[];
}

/** GET /v1/review/items/:id/account-flags: the undecided flags of the item's account, oldest first. */
export interface AccountFlags {
  /** null when the item carries no account reference (then `items` is empty). */
  accountRef: string | null;
  /** Open items and items under a live claim (anyone's), the item itself among them. */
  items: QueueRow[];
  /** More undecided flags exist than the limit (50) shown. */
  more: boolean;
}

/** One item of an account decision that was left as it was, and why. */
export interface RefusedItem {
  id: number;
  /** As for one item: `claimed-by-another`, `already-decided`, `too-many-decision-changes`, `not-found`, `other-account`. */
  error: string;
  rule: string;
  /** Who holds it, for `claimed-by-another`. */
  claim?: ClaimView;
}

/** POST /v1/review/items/:id/account-decision: what was decided and what was left. */
export interface AccountDecision {
  accountRef: string;
  outcome: Outcome;
  /** Each decided item's new queue line, in the order asked. */
  decided: ActionResult[];
  refused: RefusedItem[];
}
