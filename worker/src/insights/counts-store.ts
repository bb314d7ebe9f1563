/**
 * D1 statements that add a counts message to the daily tables exactly once. The upserts and the
 * flush-id row go in the same `DB.batch` (one transaction): the upserts only run while the flush
 * id is absent, and the id row is written last, so a redelivered message (or the same message twice
 * in one batch) adds nothing, and a failed batch leaves nothing behind to be skipped later.
 */
import type { Env } from "../env";
import type { CountsMessage } from "./counts-message";

// `INSERT … SELECT … ON CONFLICT` needs a WHERE clause on the SELECT (SQLite's parsing rule for
// upserts); the NOT EXISTS guard is that clause.
const UPSERT_VOLUME = `INSERT INTO daily_volume (day, model_version, segment, scored, flagged)
SELECT ?1, ?2, json_extract(value, '$[0]'), json_extract(value, '$[1]'), json_extract(value, '$[2]')
FROM json_each(?3)
WHERE NOT EXISTS (SELECT 1 FROM count_flushes WHERE flush_id = ?4)
ON CONFLICT (day, model_version, segment) DO UPDATE SET scored = scored + excluded.scored, flagged = flagged + excluded.flagged`;

const UPSERT_BUCKETS = `INSERT INTO drift_counts (day, model_version, segment, name, bucket, count)
SELECT ?1, ?2, json_extract(value, '$[0]'), json_extract(value, '$[1]'), json_extract(value, '$[2]'), json_extract(value, '$[3]')
FROM json_each(?3)
WHERE NOT EXISTS (SELECT 1 FROM count_flushes WHERE flush_id = ?4)
ON CONFLICT (day, model_version, segment, name, bucket) DO UPDATE SET count = count + excluded.count`;

const RECORD_FLUSH = `INSERT INTO count_flushes (flush_id, model_version, day, payments, received_at)
VALUES (?1, ?2, ?3, ?4, ?5) ON CONFLICT (flush_id) DO NOTHING`;

/**
 * The three statements that apply one counts message; run them in one `DB.batch`, in this order.
 *
 * @param receivedAt ISO-8601 time the consumer writes it.
 * @example
 * await env.DB.batch(countsStatements(env, message, new Date().toISOString()));
 */
export function countsStatements(env: Pick<Env, "DB">, message: CountsMessage, receivedAt: string): D1PreparedStatement[] {
  const payments = message.volumes.reduce((sum, [, scored]) => sum + scored, 0);
  return [
    env.DB.prepare(UPSERT_VOLUME).bind(message.day, message.modelVersion, JSON.stringify(message.volumes), message.flushId),
    env.DB.prepare(UPSERT_BUCKETS).bind(message.day, message.modelVersion, JSON.stringify(message.buckets), message.flushId),
    env.DB.prepare(RECORD_FLUSH).bind(message.flushId, message.modelVersion, message.day, payments, receivedAt),
  ];
}
