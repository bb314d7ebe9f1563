/**
 * What the model page shows of one version: the fit report and diagnostics stored in its artifact
 * (never the matrices), plus whether a weekly report marked it due for refit.
 */
import type { ModelArtifact } from "../../../shared-model/src";
import type { Env } from "../env";
import type { VersionSummary } from "../contract";
export type { VersionSummary };

/**
 * Summarises a verified artifact and reads its refit-due mark.
 *
 * @example
 * const summary = await versionSummary(env, live.artifact);
 */
export async function versionSummary(env: Pick<Env, "DB">, artifact: ModelArtifact): Promise<VersionSummary> {
  const due = await env.DB.prepare("SELECT marked_at, reasons_json FROM refit_due WHERE model_version = ?1")
    .bind(artifact.version)
    .first<{ marked_at: string; reasons_json: string }>();
  return {
    version: artifact.version,
    createdAt: artifact.createdAt,
    estimator: artifact.estimator,
    covarianceShape: artifact.covarianceShape,
    shapeReason: artifact.shapeReason,
    columns: artifact.columns,
    features: artifact.features.map((f) => ({ name: f.name, transform: f.transform })),
    segmentBy: artifact.segmentBy,
    segments: Object.entries(artifact.segments).map(([key, s]) => ({ key, rows: s.rows })),
    segmentFallbacks: artifact.segmentFallbacks,
    cutoff: artifact.cutoff,
    training: artifact.training,
    diagnostics: artifact.diagnostics,
    refitDue: due ? { markedAt: due.marked_at, reasons: JSON.parse(due.reasons_json) as string[] } : null,
  };
}
