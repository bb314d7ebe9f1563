import { describe, expect, it } from "vitest";
import type { Diagnostic } from "../../shared-model/src/types";
import { applyGate, DEFAULT_GATE, type GateInputs } from "./gate";

const good: GateInputs = {
  diagnostics: [{ code: "segment-fallback", severity: "info", message: "phone pooled" }],
  liveDiagnostics: [],
  live: { prAuc: 0.84, recallAtLiveRate: 0.6 },
  candidate: { prAuc: 0.83, recallAtLiveRate: 0.6 },
  latestWeek: { payments: 1000, candidateFlagRate: 0.012, designedRate: 0.01 },
};

function failedChecks(inputs: Partial<GateInputs>, thresholds = DEFAULT_GATE): string[] {
  return applyGate({ ...good, ...inputs }, thresholds)
    .checks.filter((c) => !c.passed)
    .map((c) => c.name);
}

describe("the renew gate", () => {
  it("passes a candidate whose ranking, recall and flag rate hold, and lists every check with its rule and finding", () => {
    const verdict = applyGate(good);
    expect(verdict.passed).toBe(true);
    expect(verdict.checks.map((c) => c.name)).toEqual(["diagnostics", "pr-auc", "recall", "flag-rate"]);
    expect(verdict.checks[1]).toMatchObject({ rule: "PR-AUC on the labels at most 0.02 below live's", found: "candidate 0.83, live 0.84 (0.01 lower)" });
  });

  it("holds back a candidate whose fit warned, naming the warning", () => {
    const warning: Diagnostic = { code: "ill-conditioned", severity: "warning", message: "condition number 3e9" };
    const verdict = applyGate({ ...good, diagnostics: [warning] });
    expect(verdict.passed).toBe(false);
    expect(verdict.checks[0].found).toBe("warning ill-conditioned: condition number 3e9");
  });

  it("passes a warning the live model's fit carried too (same code and columns), and says so", () => {
    const warning: Diagnostic = { code: "power-at-bound", severity: "warning", message: "λ = -5", columns: ["shippingShare"] };
    const verdict = applyGate({ ...good, diagnostics: [warning], liveDiagnostics: [{ ...warning, message: "λ = -4.9" }] });
    expect(verdict.passed).toBe(true);
    expect(verdict.checks[0].found).toBe("no new warning (1 the live model has too: power-at-bound)");
    const other = applyGate({ ...good, diagnostics: [{ ...warning, columns: ["amount"] }], liveDiagnostics: [warning] });
    expect(other.checks[0].passed).toBe(false);
  });

  it("allows a PR-AUC drop up to the margin and no further", () => {
    expect(failedChecks({ candidate: { prAuc: 0.82, recallAtLiveRate: 0.6 } })).toEqual([]);
    expect(failedChecks({ candidate: { prAuc: 0.8199, recallAtLiveRate: 0.6 } })).toEqual(["pr-auc"]);
    expect(failedChecks({ candidate: { prAuc: 0.8, recallAtLiveRate: 0.6 } }, { ...DEFAULT_GATE, maxPrAucDrop: 0.05 })).toEqual([]);
  });

  it("holds back any loss of recall at the live flag rate unless a drop is allowed", () => {
    expect(failedChecks({ candidate: { prAuc: 0.84, recallAtLiveRate: 0.59 } })).toEqual(["recall"]);
    expect(failedChecks({ candidate: { prAuc: 0.84, recallAtLiveRate: 0.59 } }, { ...DEFAULT_GATE, maxRecallDrop: 0.02 })).toEqual([]);
  });

  it("holds back a latest-week flag rate outside the band of the designed rate, ends included in the band", () => {
    const week = (rate: number) => ({ latestWeek: { payments: 1000, candidateFlagRate: rate, designedRate: 0.01 } });
    expect(failedChecks(week(0.02))).toEqual([]);
    expect(failedChecks(week(0.005))).toEqual([]);
    expect(failedChecks(week(0.0201))).toEqual(["flag-rate"]);
    expect(failedChecks(week(0.0049))).toEqual(["flag-rate"]);
    expect(applyGate({ ...good, ...week(0.03) }).checks[3].found).toBe("3.00 % of 1000 payments, 3× the designed 1.00 %");
  });

  it("holds back when the latest week has no payment to judge the flag rate on", () => {
    expect(failedChecks({ latestWeek: { payments: 0, candidateFlagRate: null, designedRate: 0.01 } })).toEqual(["flag-rate"]);
  });
});
