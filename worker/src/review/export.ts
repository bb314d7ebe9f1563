/**
 * The labelled set: every decided item with its features, scores, outcome and audit-sample weight,
 * as CSV (RFC 4180, header of plain column names, readable by `isodense fit` / `score` with
 * `--label-column outcome`) or NDJSON. CSV text cells are spreadsheet-safe (a leading `=`, `+`,
 * `-`, `@`, tab or carriage return gets an apostrophe in front, see shared-model's
 * spreadsheet-cell.ts, which the CLI's label reader undoes); NDJSON stays verbatim. Streamed in pages of EXPORT_PAGE rows along the decision
 * index, so memory stays flat whatever the size.
 *
 * Every export is recorded in `label_exports` (who, when, which version, rows), finished once its
 * last row has gone out: retention deletes decided items only once a finished export holds them
 * (retention/retention.ts).
 */
import type { Env } from "../env";
import { modelFor } from "./evidence";
import { ModelLoadError } from "../scoring/model-cache";
import { neutraliseTextCell, quoteCsvCell } from "../../../shared-model/src/spreadsheet-cell";

const EXPORT_PAGE = 500;

/** Fixed columns after the features; `id` is the payment id so the CLI finds it by default. */
export const FIXED_COLUMNS = [
  "model_version",
  "segment",
  "selection",
  "log_density",
  "mahalanobis_sq",
  "tail_probability",
  "outcome",
  "weight",
  "decided_at",
  "decided_by",
] as const;

interface ExportRow {
  item_id: number;
  decided_ms: number;
  transaction_id: string;
  model_version: string;
  segment: string;
  selection: string;
  log_density: number;
  mahalanobis_sq: number;
  tail_probability: number;
  outcome: string;
  inclusion_probability: number;
  decided_by: string;
  features_json: string;
}

export type ExportFormat = "csv" | "ndjson";

/** A feature named like a fixed column; the export refuses rather than write an ambiguous header. */
export class ExportColumnClash extends Error {
  constructor(readonly feature: string) {
    super(`feature ${feature} has the name of a fixed export column`);
  }
}

/**
 * Feature columns of the export: the features of every model version among the decided items, in
 * the order the models list them (first version first). A version whose artifact is gone
 * contributes the keys of its stored features.
 * @throws {ExportColumnClash} when a feature is named like a fixed column.
 */
export async function exportFeatureColumns(env: Pick<Env, "DB" | "MODELS">, modelVersion: string | undefined): Promise<string[]> {
  const versions = modelVersion
    ? [modelVersion]
    : (
        await env.DB.prepare("SELECT DISTINCT model_version FROM review_status INDEXED BY review_status_counts WHERE decided = 1 ORDER BY 1").all<{
          model_version: string;
        }>()
      ).results.map((r) => r.model_version);
  const columns: string[] = [];
  for (const version of versions) {
    let names: string[];
    try {
      names = (await modelFor(env, version)).compiled.features.map((f) => f.name);
    } catch (error) {
      if (!(error instanceof ModelLoadError)) throw error;
      const row = await env.DB.prepare("SELECT features_json FROM review_items WHERE model_version = ?1 LIMIT 1").bind(version).first<{ features_json: string }>();
      names = row ? Object.keys(JSON.parse(row.features_json) as object) : [];
    }
    for (const name of names) if (!columns.includes(name)) columns.push(name);
  }
  const clash = columns.find((c) => c === "id" || (FIXED_COLUMNS as readonly string[]).includes(c));
  if (clash) throw new ExportColumnClash(clash);
  return columns;
}

/**
 * One CSV cell as RFC 4180 requires (quoted when it holds a comma, quote or line break); text is
 * made spreadsheet-safe first. Numbers are written as JavaScript prints them and never marked.
 */
function csvCell(value: string | number | null): string {
  if (value === null) return "";
  return quoteCsvCell(typeof value === "string" ? neutraliseTextCell(value) : String(value));
}

/**
 * Streams the labelled set.
 * @example new Response(exportStream(env, "csv", columns, undefined), { headers: { "content-type": "text/csv" } })
 */
export function exportStream(
  env: Pick<Env, "DB">,
  format: ExportFormat,
  featureColumns: string[],
  modelVersion: string | undefined,
  onFinished: (rows: number) => Promise<void> = async () => {},
): ReadableStream<Uint8Array> {
  const encoder = new TextEncoder();
  let after: { decidedMs: number; id: number } | null = null;
  let headerSent = false;
  let done = false;
  let written = 0;
  return new ReadableStream<Uint8Array>({
    async pull(controller) {
      if (done) return;
      let text = "";
      if (!headerSent && format === "csv") text += ["id", ...featureColumns, ...FIXED_COLUMNS].map(csvCell).join(",") + "\n";
      headerSent = true;
      const rows = await page(env, after, modelVersion);
      for (const row of rows) text += format === "csv" ? csvLine(row, featureColumns) : ndjsonLine(row, featureColumns);
      written += rows.length;
      if (rows.length < EXPORT_PAGE) done = true;
      else after = { decidedMs: rows[rows.length - 1].decided_ms, id: rows[rows.length - 1].item_id };
      if (text) controller.enqueue(encoder.encode(text));
      if (done) {
        // Recorded before the stream ends, so a client that has read to the end finds it recorded.
        await onFinished(written);
        controller.close();
      }
    },
  });
}

async function page(env: Pick<Env, "DB">, after: { decidedMs: number; id: number } | null, modelVersion: string | undefined): Promise<ExportRow[]> {
  const params: unknown[] = [EXPORT_PAGE];
  let where = "s.decided = 1";
  if (after) {
    params.push(after.decidedMs, after.id);
    where += " AND (s.decided_ms, s.item_id) > (?2, ?3)";
  }
  if (modelVersion !== undefined) {
    params.push(modelVersion);
    where += ` AND s.model_version = ?${params.length}`;
  }
  const { results } = await env.DB.prepare(
    "SELECT s.item_id, s.decided_ms, s.transaction_id, s.model_version, s.segment, s.selection, i.log_density, s.mahalanobis_sq, " +
      "s.tail_probability, s.outcome, i.inclusion_probability, s.decided_by, i.features_json " +
      `FROM review_status s INDEXED BY review_status_by_decision JOIN review_items i ON i.id = s.item_id WHERE ${where} ` +
      "ORDER BY s.decided_ms, s.item_id LIMIT ?1",
  )
    .bind(...params)
    .all<ExportRow>();
  return results;
}

function values(row: ExportRow, featureColumns: string[]): { features: (number | null)[]; fixed: (string | number)[] } {
  const stored = JSON.parse(row.features_json) as Record<string, unknown>;
  const features = featureColumns.map((name) => (typeof stored[name] === "number" ? (stored[name] as number) : null));
  const fixed = [
    row.model_version,
    row.segment,
    row.selection,
    row.log_density,
    row.mahalanobis_sq,
    row.tail_probability,
    row.outcome,
    1 / row.inclusion_probability,
    new Date(row.decided_ms).toISOString(),
    row.decided_by,
  ];
  return { features, fixed };
}

function csvLine(row: ExportRow, featureColumns: string[]): string {
  const { features, fixed } = values(row, featureColumns);
  return [row.transaction_id, ...features, ...fixed].map(csvCell).join(",") + "\n";
}

function ndjsonLine(row: ExportRow, featureColumns: string[]): string {
  const { features, fixed } = values(row, featureColumns);
  const record: Record<string, unknown> = { id: row.transaction_id };
  featureColumns.forEach((name, k) => (record[name] = features[k]));
  FIXED_COLUMNS.forEach((name, k) => (record[name] = fixed[k]));
  return JSON.stringify(record) + "\n";
}

/**
 * Records that an export starts; its time bounds what it holds (every item decided before it).
 * Returns the id, or null when the record could not be written (the export still runs: retention
 * then simply does not count it).
 *
 * @example const exportId = await recordExportStart(env, "rosa", "csv", undefined, Date.now());
 */
export async function recordExportStart(env: Pick<Env, "DB">, actor: string, format: ExportFormat, modelVersion: string | undefined, nowMs: number): Promise<number | null> {
  try {
    const row = await env.DB.prepare("INSERT INTO label_exports (started_at, started_ms, actor, format, model_version) VALUES (?1, ?2, ?3, ?4, ?5) RETURNING id")
      .bind(new Date(nowMs).toISOString(), nowMs, actor, format, modelVersion ?? null)
      .first<{ id: number }>();
    return row?.id ?? null;
  } catch (error) {
    console.error(JSON.stringify({ event: "label-export-record-failed", stage: "start", error: String(error) }));
    return null;
  }
}

/**
 * Marks an export finished with its row count (logged, never thrown: the rows already went out).
 *
 * @example await recordExportFinish(env, exportId, 211);
 */
export async function recordExportFinish(env: Pick<Env, "DB">, exportId: number, rows: number): Promise<void> {
  try {
    await env.DB.prepare("UPDATE label_exports SET finished_at = ?2, rows = ?3 WHERE id = ?1").bind(exportId, new Date().toISOString(), rows).run();
  } catch (error) {
    console.error(JSON.stringify({ event: "label-export-record-failed", stage: "finish", exportId, error: String(error) }));
  }
}
