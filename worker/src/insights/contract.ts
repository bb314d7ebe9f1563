/**
 * Shapes of the insights API answers, shared by the worker and the review app's model page. Types
 * only, and self-contained (nothing from the Workers runtime), so the browser build can import it;
 * the worker modules take their result types from here and the routes check their answers with
 * `satisfies`.
 */
import type { DriftEntry, FlagRateCheck } from "../../../shared-model/src/drift";
import type { RateEstimates } from "../../../shared-model/src/estimates";
import type { OperatingPoint } from "../../../shared-model/src/tuning";
import type { ModelArtifact } from "../../../shared-model/src/artifact";
import type { RenewReport } from "../../../shared-model/src/renew-report";

/** The active-model pointer (`storage/model-store.ts`). */
export interface ModelPointer {
  version: string;
  shadow: string | null;
  previous: string[];
  updatedAt: string;
  updatedBy: string;
}

/** One row of the drift table (shared with `isodense drift`). */
export type { DriftEntry } from "../../../shared-model/src/drift";

/** Scored and flagged payments of one UTC day. */
export interface DayVolume {
  day: string;
  scored: number;
  flagged: number;
}

/** A day's volumes with its observed rate and the check against the expected rate (null when unknown). */
export interface DayFlagRate extends DayVolume {
  rate: number | null;
  check: FlagRateCheck | null;
}

/** Decision counts of a version by how the payment was selected and what was decided. */
export interface LabelCounts {
  flagged: { fraud: number; legitimate: number; open: number };
  audit: { fraud: number; legitimate: number; open: number };
}

/** The stored weekly report (JSON in `model_reports.report_json`). */
export interface WeeklyReport {
  status: "ok";
  modelVersion: string;
  shadowVersion: string | null;
  createdAt: string;
  window: { fromDay: string; toDay: string; payments: number };
  drift: DriftEntry[];
  flagRates: DayFlagRate[];
  expectedFlagRate: number | null;
  labels: { since: string | null; counts: LabelCounts };
  ageDays: number;
  refitAfterDays: number;
  refitDue: boolean;
  reasons: string[];
  /** The shadow and how long it has waited for a person's decision (null without a shadow). */
  shadowWait?: { version: string; since: string | null; days: number | null; limitDays: number; overdue: boolean } | null;
}

/** A weekly report that could not be computed. */
export interface FailedReport {
  status: "error";
  createdAt: string;
  modelVersion: string | null;
  error: string;
}

/** One version as the model page shows it (fit report and diagnostics; never the matrices). */
export interface VersionSummary {
  version: string;
  createdAt: string;
  estimator: ModelArtifact["estimator"];
  covarianceShape: ModelArtifact["covarianceShape"];
  shapeReason: string;
  columns: string[];
  features: { name: string; transform: string }[];
  segmentBy: string | null;
  /** Fitted segments with the rows each was fitted on. */
  segments: { key: string; rows: number }[];
  segmentFallbacks: Record<string, string>;
  cutoff: ModelArtifact["cutoff"];
  training: ModelArtifact["training"];
  diagnostics: ModelArtifact["diagnostics"];
  /** Set when a weekly report marked this version due for refit. */
  refitDue: { markedAt: string; reasons: string[] } | null;
}

/** Figures at one cutoff. */
export interface CutoffFigures {
  cutoffMahalanobisSq: number;
  /** The labelled set's operating point (weighted counts). */
  point: OperatingPoint;
  /** Estimates for all traffic, with intervals and the too-few-labels verdict. */
  estimates: RateEstimates;
  /** point.flagRate × scored payments per day; null without counted traffic. */
  expectedFlagsPerDay: number | null;
}

/** Counts and rates of one (live, shadow) pair on the traffic both scored. */
export interface ShadowComparison {
  liveVersion: string;
  shadowVersion: string;
  /** Payments scored by both. */
  payments: number;
  liveFlags: number;
  shadowFlags: number;
  /** Flagged by both. */
  bothFlags: number;
  /** Share flagged by each model (null without payments). */
  liveFlagRate: number | null;
  shadowFlagRate: number | null;
  /** Share of payments on which both made the same call (flag or pass). */
  agreement: number | null;
  /** Flagged by both / flagged by either (Jaccard index of the flag sets; null when neither flagged). */
  flagOverlap: number | null;
  firstScoredAt: string | null;
  lastScoredAt: string | null;
  /** The same counts per UTC day, oldest first. */
  days: { day: string; payments: number; liveFlags: number; shadowFlags: number; bothFlags: number }[];
}

/** What a successful publish answers (201). */
export interface PublishedCutoff {
  version: string;
  fromVersion: string;
  cutoff: { fromMahalanobisSq: number; toMahalanobisSq: number; tailProbability: number; flagRate: number | null; basis: string };
  pointer: ModelPointer;
  publishedBy: string;
}

/** One row of `model_events`. */
export interface ModelEventRow {
  id: number;
  at: string;
  actor: string;
  action: string;
  fromVersion: string | null;
  toVersion: string | null;
  outcome: "applied" | "failed";
  detail: string | null;
}

/** The latest stored weekly report. */
export interface StoredReport {
  id: number;
  createdAt: string;
  runBy: string;
  status: "ok" | "error";
  body: WeeklyReport | FailedReport;
}

/** A renew report as filed with the service (`renew_reports`). */
export interface StoredRenewReport {
  id: number;
  filedAt: string;
  filedBy: string;
  report: RenewReport;
}

/** `GET /v1/insights/model`. */
export interface ModelPageData {
  pointer: ModelPointer;
  active: VersionSummary;
  shadow: VersionSummary | null;
  /** The renew report that published the shadow, and the latest held-back candidate filed after it. */
  renew: { shadow: StoredRenewReport | null; held: StoredRenewReport | null };
  /** When the shadow was set (its latest applied shadow-set event); null without a shadow. */
  shadowSince: string | null;
  report: StoredReport | null;
  drift: { fromDay: string; toDay: string; payments: number; rows: DriftEntry[] };
  dailyFlags: DayFlagRate[];
  events: ModelEventRow[];
}

/** `GET /v1/insights/operating`. */
export interface OperatingData {
  version: string;
  /** Versions whose decisions are used: this one and earlier live ones with the same parameters. */
  labelVersions: string[];
  /** Model columns: the degrees of freedom of d² under the model. */
  columns: number;
  cutoff: VersionSummary["cutoff"];
  /**
   * Decided review items of fully decided (version, UTC day) cells (parallel arrays) and counts:
   * `undecided` items still wait, and `heldBack` decisions share a day with them, so they are left
   * out until that day is finished (decisions that come fraud first would bias a half-decided day).
   */
  labels: { mahalanobisSq: number[]; fraud: number[]; weight: number[]; flagged: number[]; labelled: number; fraudCount: number; undecided: number; heldBack: number };
  traffic: { days: number; daysWithTraffic: number; scored: number; flagged: number; scoredPerDay: number | null };
  atCutoff: CutoffFigures | null;
  unavailable: string | null;
}

/** A payment on which live and shadow made different calls. */
export interface Disagreement {
  transactionId: string;
  scoredAt: string;
  liveFlagged: boolean;
  shadowFlagged: boolean;
  liveMahalanobisSq: number;
  shadowMahalanobisSq: number;
}

/** `GET /v1/insights/shadow`. */
export interface ShadowData {
  pointer: ModelPointer;
  comparison: ShadowComparison | null;
  /** The latest payments flagged by one model only, newest first (at most 20). */
  disagreements: Disagreement[];
}

/** `GET /v1/insights/histogram`. */
export interface HistogramData {
  version: string;
  days: number;
  edges: number[];
  counts: number[];
  payments: number;
  expectedShare: number;
  cutoffMahalanobisSq: number;
}
