/**
 * The weekly report run by the Cron trigger: drift of the last 7 UTC days against the training
 * reference, daily flag rates against the expected rate, label counts since the model went live,
 * the refit-due mark, and how long the shadow has waited for a person (overdue past SHADOW_WAIT_DAYS). Stored in `model_reports`; fitting itself stays offline (`isodense refit`).
 *
 * It never throws: any failure is logged and stored as an error report, so a broken week shows on
 * the model page instead of vanishing into the scheduler's logs.
 */
import type { Env } from "../env";
import { modelCache } from "../scoring/model-cache";
import { readPointer } from "../storage/model-store";
import { dayFlagRates, driftEntries, refitReasons } from "./drift-report";
import { readSettings } from "../settings";
import { bucketTotals, dailyVolumes, dayBefore, labelCounts, liveSince } from "./traffic-queries";
import type { FailedReport, WeeklyReport } from "../contract";
import { shadowSetAt } from "./shadow-comparison";
export type { FailedReport, WeeklyReport };

/** Days covered by the drift window (today included). */
export const REPORT_WINDOW_DAYS = 7;

/**
 * Computes and stores the report; returns what was stored (never throws).
 *
 * @param runBy the cron expression, or "manual"
 * @example
 * export default { scheduled: (event, env, ctx) => ctx.waitUntil(runWeeklyReport(env, event.cron, new Date(event.scheduledTime))) };
 */
export async function runWeeklyReport(env: Env, runBy: string, now: Date): Promise<WeeklyReport | FailedReport> {
  let version: string | null = null;
  try {
    const pointer = await readPointer(env);
    if (pointer === null) return await storeFailure(env, runBy, now, null, "no model is active; nothing to report on");
    version = pointer.version;
    const report = await computeReport(env, pointer.version, pointer.shadow, now);
    const id = await storeReport(env, runBy, report);
    if (report.refitDue) await markDue(env, report, id);
    console.log(
      JSON.stringify({
        event: "weekly-report",
        modelVersion: report.modelVersion,
        refitDue: report.refitDue,
        reasons: report.reasons,
        shadowOverdue: report.shadowWait?.overdue ?? false,
      }),
    );
    return report;
  } catch (error) {
    console.error(JSON.stringify({ event: "weekly-report-failed", modelVersion: version, error: String(error) }));
    try {
      return await storeFailure(env, runBy, now, version, String(error));
    } catch (storeError) {
      console.error(JSON.stringify({ event: "weekly-report-store-failed", error: String(storeError) }));
      return { status: "error", createdAt: now.toISOString(), modelVersion: version, error: String(error) };
    }
  }
}

/**
 * The report of `version` at `now`, without storing it.
 *
 * @throws when the model cannot be loaded or D1 cannot be read (the caller turns that into an error report).
 */
export async function computeReport(env: Env, version: string, shadowVersion: string | null, now: Date): Promise<WeeklyReport> {
  // All the loop's variables, so that a malformed flush setting (which only stops counting, never a
  // payment) shows as an error report on the model page.
  const settings = readSettings(env, ["DRIFT_FLUSH_PAYMENTS", "DRIFT_FLUSH_SECONDS", "REFIT_AFTER_DAYS", "SHADOW_WAIT_DAYS"]);
  const live = await modelCache.model(env, version);
  const fromDay = dayBefore(now, REPORT_WINDOW_DAYS - 1);
  const toDay = dayBefore(now, 0);
  const [totals, volumes, since, shadowSince] = await Promise.all([
    bucketTotals(env, live, fromDay, toDay),
    dailyVolumes(env, version, fromDay, toDay),
    liveSince(env, version),
    shadowVersion === null ? Promise.resolve(null) : shadowSetAt(env, shadowVersion),
  ]);
  const counts = await labelCounts(env, version, since ? Date.parse(since) : 0);
  const drift = driftEntries(live, totals);
  const expected = live.artifact.cutoff.flagRate;
  const flagRates = dayFlagRates(volumes, expected);
  const ageDays = Math.max(0, (now.getTime() - Date.parse(live.artifact.createdAt)) / 86_400_000);
  const reasons = refitReasons(drift, flagRates, ageDays, settings.REFIT_AFTER_DAYS);
  return {
    status: "ok",
    modelVersion: version,
    shadowVersion,
    createdAt: now.toISOString(),
    window: { fromDay, toDay, payments: totals.payments },
    drift,
    flagRates,
    expectedFlagRate: expected,
    labels: { since, counts },
    ageDays,
    refitAfterDays: settings.REFIT_AFTER_DAYS,
    refitDue: reasons.length > 0,
    reasons,
    shadowWait: shadowVersion === null ? null : shadowWait(shadowVersion, shadowSince, now, settings.SHADOW_WAIT_DAYS),
  };
}

/**
 * How long the shadow has waited for a person's decision, and whether that is longer than the
 * setting allows (a shadow set before the event log kept its time waits an unknown time).
 * @example shadowWait("m20261208-77ab01cd", "2026-11-20T04:00:00Z", new Date("2026-12-07T04:00:00Z"), 14).overdue // true (17 days)
 */
export function shadowWait(version: string, since: string | null, now: Date, limitDays: number): NonNullable<WeeklyReport["shadowWait"]> {
  const days = since === null ? null : Math.max(0, (now.getTime() - Date.parse(since)) / 86_400_000);
  return { version, since, days, limitDays, overdue: days !== null && days > limitDays };
}

async function storeReport(env: Env, runBy: string, report: WeeklyReport): Promise<number> {
  const row = await env.DB.prepare("INSERT INTO model_reports (created_at, run_by, model_version, status, refit_due, report_json) VALUES (?1, ?2, ?3, 'ok', ?4, ?5) RETURNING id")
    .bind(report.createdAt, runBy, report.modelVersion, report.refitDue ? 1 : 0, JSON.stringify(report))
    .first<{ id: number }>();
  if (!row) throw new Error("model_reports insert returned no row id");
  return row.id;
}

async function storeFailure(env: Env, runBy: string, now: Date, version: string | null, message: string): Promise<FailedReport> {
  const report: FailedReport = { status: "error", createdAt: now.toISOString(), modelVersion: version, error: message };
  await env.DB.prepare("INSERT INTO model_reports (created_at, run_by, model_version, status, refit_due, report_json) VALUES (?1, ?2, ?3, 'error', 0, ?4)")
    .bind(report.createdAt, runBy, version, JSON.stringify(report))
    .run();
  return report;
}

/** Marks the version due; the first mark's time is kept, the reasons follow the latest report. */
async function markDue(env: Env, report: WeeklyReport, reportId: number): Promise<void> {
  await env.DB.prepare(
    `INSERT INTO refit_due (model_version, marked_at, reasons_json, report_id) VALUES (?1, ?2, ?3, ?4)
     ON CONFLICT (model_version) DO UPDATE SET reasons_json = excluded.reasons_json, report_id = excluded.report_id`,
  )
    .bind(report.modelVersion, report.createdAt, JSON.stringify(report.reasons), reportId)
    .run();
}
