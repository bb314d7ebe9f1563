/**
 * The report of one `isodense renew` run: what the weekly refit read, the candidate it fitted, the
 * safety gate's checks against the live model, and what became of the candidate (published as the
 * shadow, already published, or held back for a person). One schema for the CLI that writes it,
 * the service that stores it beside the candidate, and the model page that shows it.
 */
import { z } from "zod";

/** The `format` of a renew report. */
export const RENEW_REPORT_FORMAT = "isodense.renew/v1";

/** What became of the candidate. */
export const RENEW_OUTCOMES = ["published", "unchanged", "held"] as const;

/** `published`: now the shadow; `unchanged`: identical to the live model or the shadow, nothing sent; `held`: the gate held it back. */
export type RenewOutcome = (typeof RENEW_OUTCOMES)[number];

/** The gate's checks, in the order the report lists them. */
export const GATE_CHECKS = ["diagnostics", "pr-auc", "recall", "flag-rate"] as const;

/** One check of the gate. */
export type GateCheckName = (typeof GATE_CHECKS)[number];

// zod 4 numbers are finite: Infinity and NaN are refused.
const finite = z.number();
const share = z.number().min(0).max(1);
const version = z.string().min(1).max(128);
const isoTime = z.iso.datetime({ offset: true });

const gateCheckSchema = z.strictObject({
  name: z.enum(GATE_CHECKS),
  passed: z.boolean(),
  /** The rule in words, with the threshold, e.g. "candidate PR-AUC ≥ live − 0.02". */
  rule: z.string().max(500),
  /** What was found, in words with the numbers. */
  found: z.string().max(2000),
});

const modelFiguresSchema = z.strictObject({
  version,
  prAuc: share,
  recallAtLiveRate: share,
  cutoffMahalanobisSq: finite,
  /** Share of the latest week's payments the model flags at its own cutoff (null without payments). */
  latestWeekFlagRate: share.nullable(),
});

const driftRowSchema = z.strictObject({
  name: z.string().max(200),
  psi: finite.nullable(),
  level: z.enum(["stable", "watch", "shifted"]).nullable(),
  payments: z.number().int().min(0),
  note: z.string().max(500).nullable(),
});

const windowSchema = z.strictObject({ from: isoTime, to: isoTime, days: z.number().positive() });

const ledgerSchema = z.strictObject({
  source: z.string().max(500),
  rowsRead: z.number().int().min(0),
  rowsInWindow: z.number().int().min(0),
  confirmedFraudLeftOut: z.number().int().min(0),
  ledgerFraudLeftOut: z.number().int().min(0),
  dismissedKept: z.number().int().min(0),
  rowsUsed: z.number().int().min(0),
});

const labelsSchema = z.strictObject({ rows: z.number().int().min(0), fraud: z.number().int().min(0) });

const diagnosticsSchema = z.array(z.strictObject({ severity: z.enum(["error", "warning", "info"]), code: z.string().max(100), message: z.string().max(2000) })).max(200);

/** The reasons a candidate was held back or refused, each `check: what was found`. */
const reasonsSchema = z.array(z.string().max(2000)).max(20);

/** zod schema of a renew report (every object strict). */
export const renewReportSchema = z.strictObject({
  format: z.literal(RENEW_REPORT_FORMAT),
  createdAt: isoTime,
  outcome: z.enum(RENEW_OUTCOMES),
  /** The reasons it was held back (empty unless `held`). */
  reasons: reasonsSchema,
  liveVersion: version,
  candidateVersion: version,
  /** The shadow before this run (null when there was none). */
  shadowBefore: version.nullable(),
  window: windowSchema,
  ledger: ledgerSchema,
  labels: labelsSchema,
  live: modelFiguresSchema,
  candidate: modelFiguresSchema,
  /** The live model's flag rate on the labelled set, at which both recalls are read. */
  liveFlagRateOnLabels: share,
  latestWeek: z.strictObject({ from: isoTime, to: isoTime, payments: z.number().int().min(0) }),
  /** Flags of both models on the training window (Jaccard of the flag sets). */
  overlap: z.strictObject({ live: z.number().int().min(0), candidate: z.number().int().min(0), both: z.number().int().min(0) }),
  gate: z.strictObject({
    passed: z.boolean(),
    thresholds: z.strictObject({ maxPrAucDrop: share, maxRecallDrop: share, flagRateBand: z.tuple([finite, finite]) }),
    checks: z.array(gateCheckSchema).max(GATE_CHECKS.length),
  }),
  diagnostics: diagnosticsSchema,
  /** PSI of the window's normal payments against the live model's training traffic (reported, not gated). */
  drift: z.array(driftRowSchema).max(1000),
});

/** A renew report. */
export type RenewReport = z.infer<typeof renewReportSchema>;

/** One check of a report's gate. */
export type GateCheck = RenewReport["gate"]["checks"][number];

/**
 * The report of a run whose candidate's fit was refused by its diagnostics (too few rows in the
 * window, a constant column, a linear dependency…): nothing was fitted or sent to the service, so it
 * is written to `--report` and the keep folder only. It shares the run's fields with
 * {@link renewReportSchema} (`candidateVersion` is null) and adds `refusal`; the backtest, gate,
 * overlap and drift do not exist without a candidate.
 */
export const renewRefusedReportSchema = z.strictObject({
  format: z.literal(RENEW_REPORT_FORMAT),
  createdAt: isoTime,
  outcome: z.literal("refused"),
  /** One `code: message` per error diagnostic of the refused fit. */
  reasons: reasonsSchema,
  /** The first error: the check that refused (its diagnostic code), its message, and the run's exit code. */
  refusal: z.strictObject({ check: z.string().max(100), message: z.string().max(2000), exitCode: z.number().int().min(0).max(255) }),
  liveVersion: version,
  candidateVersion: z.null(),
  shadowBefore: version.nullable(),
  window: windowSchema,
  /** What the refit had read when the fit was refused. */
  ledger: ledgerSchema,
  labels: labelsSchema,
  diagnostics: diagnosticsSchema,
});

/** The report of a run whose candidate's fit was refused. */
export type RenewRefusedReport = z.infer<typeof renewRefusedReportSchema>;

/** Any report `isodense renew` writes: a candidate's (published, unchanged or held) or a refusal. */
export type RenewRunReport = RenewReport | RenewRefusedReport;
