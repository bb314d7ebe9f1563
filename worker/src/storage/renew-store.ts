/**
 * The renew reports in D1 (`renew_reports`, migration 0014): filed by `isodense renew` beside the
 * candidate it stored, read by the model page.
 */
import type { RenewReport } from "../../../shared-model/src/renew-report";
import type { Env } from "../env";
import type { StoredRenewReport } from "../contract";

/**
 * Files a report; an identical candidate's report with the same outcome is kept as first filed.
 * @returns whether a row was added
 * @example await fileRenewReport(env, "ana", report) // true, then false for the same candidate again
 */
export async function fileRenewReport(env: Pick<Env, "DB">, actor: string, report: RenewReport, at: Date = new Date()): Promise<boolean> {
  const result = await env.DB.prepare(
    `INSERT INTO renew_reports (filed_at, actor, candidate_version, live_version, outcome, report_json) VALUES (?1, ?2, ?3, ?4, ?5, ?6)
     ON CONFLICT (candidate_version, outcome) DO NOTHING`,
  )
    .bind(at.toISOString(), actor, report.candidateVersion, report.liveVersion, report.outcome, JSON.stringify(report))
    .run();
  return (result.meta.changes ?? 0) > 0;
}

/**
 * The reports the model page shows: the one that published `shadowVersion` (when set), and the
 * latest held-back candidate filed after it (a person has not looked at it through a shadow).
 */
export async function renewReportsForPage(env: Pick<Env, "DB">, shadowVersion: string | null): Promise<{ shadow: StoredRenewReport | null; held: StoredRenewReport | null }> {
  const shadow = shadowVersion === null ? null : await readOne(env, "WHERE candidate_version = ?1 AND outcome = 'published' ORDER BY id DESC LIMIT 1", shadowVersion);
  const held = await readOne(env, "WHERE outcome = 'held' AND id > ?1 ORDER BY id DESC LIMIT 1", shadow?.id ?? 0);
  return { shadow, held };
}

async function readOne(env: Pick<Env, "DB">, where: string, value: string | number): Promise<StoredRenewReport | null> {
  const row = await env.DB.prepare(`SELECT id, filed_at, actor, report_json FROM renew_reports ${where}`)
    .bind(value)
    .first<{ id: number; filed_at: string; actor: string; report_json: string }>();
  return row === null ? null : { id: row.id, filedAt: row.filed_at, filedBy: row.actor, report: JSON.parse(row.report_json) as RenewReport };
}
