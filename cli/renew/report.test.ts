import { describe, expect, it } from "vitest";
import { diagnoseColumns, diagnoseRowCount, FitRefusal } from "../../shared-model/src/diagnostics";
import { MomentAccumulator } from "../../shared-model/src/moments";
import { renewRefusedReportSchema } from "../../shared-model/src/renew-report";
import { RefitRefusal } from "../commands/refit";
import { EXIT_REFUSED } from "../errors";
import { buildRefusedReport, reportFileName } from "./report";

const DAY = 86_400_000;
const toMs = Date.parse("2026-11-30T00:00:00Z");

/** A refit of a 28-day window that held 6 usable rows for 9 columns (invented counts). */
function refusal(): RefitRefusal {
  return new RefitRefusal([...diagnoseRowCount(6, 9, "full"), { code: "few-rows", severity: "warning", message: "a warning beside the error" }], {
    source: "payments.csv",
    counts: { rowsRead: 40, excludedConfirmedFraud: 1, excludedLedgerFraud: 0, dismissedKept: 2, outsideWindow: 33, rowsUsed: 6 },
    labels: { rows: 12, fraudCount: 3 },
    window: { fromMs: toMs - 28 * DAY, toMs },
  });
}

describe("the report of a refused renew fit", () => {
  it("names the check that refused, its message and the exit code, and keeps the run's window, ledger counts and labels", () => {
    const error = refusal();
    const report = buildRefusedReport({ refusal: error, liveVersion: "m20261123-aaaa", shadowBefore: null, exitCode: EXIT_REFUSED, createdAt: new Date(toMs + 5 * 3_600_000) });
    expect(renewRefusedReportSchema.parse(report)).toEqual(report);
    expect(report.outcome).toBe("refused");
    expect(report.refusal).toEqual({
      check: "too-few-rows",
      message: "6 rows for 9 columns: a full covariance needs at least 10 rows (n+1); use --covariance diagonal or more data",
      exitCode: 1,
    });
    expect(report.reasons).toEqual([`too-few-rows: ${report.refusal.message}`]);
    expect(report.candidateVersion).toBeNull();
    expect(report.window).toEqual({ from: "2026-11-02T00:00:00.000Z", to: "2026-11-30T00:00:00.000Z", days: 28 });
    expect(report.ledger).toEqual({ source: "payments.csv", rowsRead: 40, rowsInWindow: 7, confirmedFraudLeftOut: 1, ledgerFraudLeftOut: 0, dismissedKept: 2, rowsUsed: 6 });
    expect(report.labels).toEqual({ rows: 12, fraud: 3 });
    // Every diagnostic is kept, the warning too, errors first.
    expect(report.diagnostics.map((d) => d.code)).toEqual(["too-few-rows", "few-rows"]);
    // Still a FitRefusal: every command answers it with exit 1 and the diagnostics.
    expect(error).toBeInstanceOf(FitRefusal);
  });

  it("lists each error of a fit refused for several reasons, the first one as the refusal", () => {
    // A window in which every payment was in the same currency: a constant column.
    const acc = new MomentAccumulator(2);
    for (const amount of [12, 30, 18, 44, 25]) acc.push(Float64Array.of(amount, 978));
    const constant = diagnoseColumns(acc, ["amount", "currencyCode"]);
    expect(constant.some((d) => d.severity === "error")).toBe(true);
    const error = new RefitRefusal([...constant, ...diagnoseRowCount(1, 2, "diagonal")], { ...refusal().read });
    const report = buildRefusedReport({ refusal: error, liveVersion: "m20261123-aaaa", shadowBefore: "m20261124-bbbb", exitCode: EXIT_REFUSED, createdAt: new Date(toMs) });
    expect(report.reasons.map((r) => r.split(":")[0])).toEqual(error.diagnostics.filter((d) => d.severity === "error").map((d) => d.code));
    expect(report.refusal.check).toBe(error.diagnostics[0].code);
    expect(report.shadowBefore).toBe("m20261124-bbbb");
  });

  it("is filed in the keep folder under its time, as a refusal has no candidate version", () => {
    const report = buildRefusedReport({
      refusal: refusal(),
      liveVersion: "m20261123-aaaa",
      shadowBefore: null,
      exitCode: EXIT_REFUSED,
      createdAt: new Date("2026-11-30T05:00:01.250Z"),
    });
    expect(reportFileName(report)).toBe("renew-refused-2026-11-30T050001250Z.json");
  });
});
