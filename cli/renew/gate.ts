/**
 * The safety gate of `isodense renew`: the checks a refitted candidate must pass before it may
 * score beside the live model as its shadow. Each check says its rule with the threshold and what
 * was found, so a held-back candidate comes with its reasons.
 */
import type { GateCheck } from "../../shared-model/src/renew-report";
import type { Diagnostic } from "../../shared-model/src/types";
import { formatForPeople, formatPercent } from "../numbers";

/** The thresholds (each a `renew` option). */
export interface GateThresholds {
  /** Largest drop of PR-AUC (average precision) on the labels, candidate against live. */
  maxPrAucDrop: number;
  /** Largest drop of recall at the live flag rate on the labels. */
  maxRecallDrop: number;
  /** The candidate's flag rate on the latest week, as multiples of the rate its cutoff was set for: [low, high]. */
  flagRateBand: [number, number];
}

/**
 * Defaults: a PR-AUC at most 0.02 below live's (an allowance for the noise of a labelled set of a
 * few hundred payments; a larger drop is a worse ranking), recall at the live flag rate not lower
 * at all, and a latest-week flag rate between half and twice the rate the cutoff was set for (a
 * cutoff that flags twice what the review team was sized for needs a person's decision).
 */
export const DEFAULT_GATE: GateThresholds = { maxPrAucDrop: 0.02, maxRecallDrop: 0, flagRateBand: [0.5, 2] };

/** What the gate looks at. */
export interface GateInputs {
  /** The candidate fit's diagnostics (all severities; a fit with an error was refused before the gate). */
  diagnostics: readonly Diagnostic[];
  /** The live model's diagnostics: a warning it already carries (same code and columns) is known, not new. */
  liveDiagnostics: readonly Diagnostic[];
  live: { prAuc: number; recallAtLiveRate: number };
  candidate: { prAuc: number; recallAtLiveRate: number };
  /** The candidate's flagged share of the latest week, and the rate its cutoff was set for. */
  latestWeek: { payments: number; candidateFlagRate: number | null; designedRate: number | null };
}

/** The gate's verdict: passed when every check passed. */
export interface GateVerdict {
  passed: boolean;
  checks: GateCheck[];
}

/**
 * Applies the gate.
 * @example applyGate(inputs, DEFAULT_GATE).checks.filter((c) => !c.passed).map((c) => c.found)
 */
export function applyGate(inputs: GateInputs, thresholds: GateThresholds = DEFAULT_GATE): GateVerdict {
  const checks: GateCheck[] = [diagnosticsCheck(inputs), prAucCheck(inputs, thresholds), recallCheck(inputs, thresholds), flagRateCheck(inputs, thresholds)];
  return { passed: checks.every((c) => c.passed), checks };
}

function diagnosticsCheck({ diagnostics, liveDiagnostics }: GateInputs): GateCheck {
  const rule = "the candidate's fit has no warning the live model's fit did not have";
  const key = (d: Diagnostic) => `${d.code}|${(d.columns ?? []).join(",")}`;
  const known = new Set(liveDiagnostics.filter((d) => d.severity !== "info").map(key));
  const serious = diagnostics.filter((d) => d.severity !== "info");
  const fresh = serious.filter((d) => !known.has(key(d)));
  const carried = serious.length - fresh.length;
  const carriedText =
    carried === 0
      ? ""
      : ` (${carried} the live model has too: ${serious
          .filter((d) => known.has(key(d)))
          .map((d) => d.code)
          .join(", ")})`;
  if (fresh.length === 0) return { name: "diagnostics", passed: true, rule, found: `no new warning${carriedText}` };
  return { name: "diagnostics", passed: false, rule, found: fresh.map((d) => `${d.severity} ${d.code}: ${d.message}`).join("; ") + carriedText };
}

function prAucCheck({ live, candidate }: GateInputs, t: GateThresholds): GateCheck {
  const drop = live.prAuc - candidate.prAuc;
  return {
    name: "pr-auc",
    passed: drop <= t.maxPrAucDrop + 1e-12,
    rule: `PR-AUC on the labels at most ${formatForPeople(t.maxPrAucDrop)} below live's`,
    found: `candidate ${formatForPeople(candidate.prAuc)}, live ${formatForPeople(live.prAuc)} (${drop > 0 ? `${formatForPeople(drop)} lower` : drop < 0 ? `${formatForPeople(-drop)} higher` : "equal"})`,
  };
}

function recallCheck({ live, candidate }: GateInputs, t: GateThresholds): GateCheck {
  const drop = live.recallAtLiveRate - candidate.recallAtLiveRate;
  return {
    name: "recall",
    passed: drop <= t.maxRecallDrop + 1e-12,
    rule: t.maxRecallDrop === 0 ? "recall at the live flag rate not lower than live's" : `recall at the live flag rate at most ${formatForPeople(t.maxRecallDrop)} below live's`,
    found: `candidate ${formatForPeople(candidate.recallAtLiveRate)}, live ${formatForPeople(live.recallAtLiveRate)}`,
  };
}

function flagRateCheck({ latestWeek }: GateInputs, t: GateThresholds): GateCheck {
  const [low, high] = t.flagRateBand;
  const rule = `flag rate on the latest week between ${formatForPeople(low)}× and ${formatForPeople(high)}× the rate the cutoff was set for`;
  const { candidateFlagRate: rate, designedRate, payments } = latestWeek;
  if (rate === null || payments === 0) return { name: "flag-rate", passed: false, rule, found: "the ledger holds no payment in the latest week" };
  if (designedRate === null)
    return { name: "flag-rate", passed: false, rule, found: `${formatPercent(rate)} of ${payments} payments; the candidate's cutoff records no designed rate` };
  const ratio = rate / designedRate;
  return {
    name: "flag-rate",
    passed: ratio >= low && ratio <= high,
    rule,
    found: `${formatPercent(rate)} of ${payments} payments, ${formatForPeople(ratio)}× the designed ${formatPercent(designedRate)}`,
  };
}
