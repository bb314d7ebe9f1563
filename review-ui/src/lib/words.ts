/**
 * The words the app shows for the API's enum values, in one place, so a raw value such as
 * `flag-rate` never reaches the screen and the queue, the account history and the payment view
 * say the same thing.
 */
import type { CutoffBasis } from "../../../shared-model/src/tuning";
import type { CovarianceShape, EstimatorName, TransformKind } from "../../../shared-model/src/types";
import type { AccountDecision, ClaimView, Outcome, RefusedItem, ReviewState, Selection } from "@contract";

/** The three states of a review item, as the API names them (`open`, `claimed`, `decided`). */
export const STATE_WORDS: Record<ReviewState, string> = { open: "Open", claimed: "Claimed", decided: "Decided" };

/** Why an item is in the queue; the queue column and the filter use these same words. */
export const SELECTION_WORDS: Record<Selection, string> = { flagged: "beyond the cutoff", audit: "audit draw" };

/** The label of the queue column and of the filter on it. */
export const SELECTION_LABEL = "Reason in queue";

/** An analyst's conclusion. */
export const OUTCOME_WORDS: Record<Outcome, string> = { fraud: "fraud", legitimate: "legitimate" };

/** How a model version's cutoff was chosen. */
export const BASIS_WORDS: Record<CutoffBasis, string> = {
  "flag-rate": "set for a share of payments flagged",
  f1: "best balance of precision and recall (F1)",
  capacity: "set to fit analyst capacity",
  cost: "least expected cost",
  manual: "set by hand",
};

/** The covariance estimator. */
export const ESTIMATOR_WORDS: Record<EstimatorName, string> = {
  classical: "plain mean and covariance",
  shrinkage: "covariance shrunk towards a scaled identity (Ledoit–Wolf)",
  robust: "robust to outliers in training (FAST-MCD)",
};

/** The covariance shape. */
export const SHAPE_WORDS: Record<CovarianceShape, string> = { full: "all features together", diagonal: "each feature on its own" };

/** A feature transform, as a short aside after the feature's name ("none" says nothing). */
export const TRANSFORM_WORDS: Record<TransformKind, string> = {
  none: "",
  log: "log",
  log1p: "log of 1 + value",
  "yeo-johnson": "Yeo–Johnson power",
  "cyclic-hour": "hour on a circle",
};

/** A state badge: the state word and what qualifies it (outcome and who, or who holds the claim). */
export interface BadgeWords {
  state: ReviewState;
  word: string;
  detail: string;
}

/** What a badge needs to know about an item; the account history knows only the state and outcome. */
export interface BadgeSubject {
  state: ReviewState;
  claim?: ClaimView | null;
  outcome?: Outcome | null;
  decidedBy?: string | null;
}

/**
 * Words of the state badge for one item, as the signed-in analyst `me` reads them.
 * @example badgeWords({ state: "claimed", claim: { by: "tomas", until } }, "rosa") // { word: "Claimed", detail: "by tomas until 14:05" }
 */
export function badgeWords(subject: BadgeSubject, me: string, clock: (iso: string) => string): BadgeWords {
  const { state } = subject;
  const word = STATE_WORDS[state];
  if (state === "decided") {
    const outcome = subject.outcome ? OUTCOME_WORDS[subject.outcome] : "";
    const by = subject.decidedBy ? `by ${subject.decidedBy === me ? "you" : subject.decidedBy}` : "";
    return { state, word, detail: [outcome, by].filter(Boolean).join(" ") };
  }
  if (state === "claimed" && subject.claim) {
    const who = subject.claim.by === me ? "you" : subject.claim.by;
    return { state, word, detail: `by ${who} until ${clock(subject.claim.until)}` };
  }
  return { state, word, detail: "" };
}

/** The badge subject of a queue line (or the payment view's item). */
export function rowSubject(row: { state: ReviewState; claim: ClaimView | null; decision: { outcome: Outcome; by: string } | null }): BadgeSubject {
  return { state: row.state, claim: row.claim, outcome: row.decision?.outcome ?? null, decidedBy: row.decision?.by ?? null };
}

/** A feature's name with its transform in words ("amount (log)"; the plain name when untransformed). */
export function featureLabel(feature: { name: string; transform: string }): string {
  const words = TRANSFORM_WORDS[feature.transform as TransformKind] ?? "another transform";
  return words ? `${feature.name} (${words})` : feature.name;
}

/** Why one flag of an account decision was left as it was, in a few words. */
function refusalWords(refused: RefusedItem, clock: (iso: string) => string): string {
  if (refused.error === "claimed-by-another" && refused.claim) return `claimed by ${refused.claim.by} until ${clock(refused.claim.until)}`;
  if (refused.error === "already-decided") return "already decided";
  if (refused.error === "too-many-decision-changes") return "decided too often in the last hour";
  if (refused.error === "other-account") return "of another account";
  return "not found";
}

/**
 * One line for the status bar after an account's flags were decided together: how many, and each
 * flag left as it was with why. `names` maps item ids to payment ids.
 * @example describeAccountDecision(answer, names, clock) // "3 flags of acct-7 confirmed as fraud. Left as they were: tx-9 (claimed by tomas until 14:05)."
 */
export function describeAccountDecision(
  answer: Pick<AccountDecision, "accountRef" | "outcome" | "decided" | "refused">,
  names: ReadonlyMap<number, string>,
  clock: (iso: string) => string,
): string {
  const verb = answer.outcome === "fraud" ? "confirmed as fraud" : "dismissed as legitimate";
  const n = answer.decided.length;
  const head = n === 0 ? `No flag of ${answer.accountRef} was decided.` : `${n} ${n === 1 ? "flag" : "flags"} of ${answer.accountRef} ${verb}.`;
  if (answer.refused.length === 0) return head;
  const left = answer.refused.map((r) => `${names.get(r.id) ?? `item ${r.id}`} (${refusalWords(r, clock)})`).join(", ");
  return `${head} Left as they were: ${left}.`;
}
