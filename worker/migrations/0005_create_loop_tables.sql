-- Closing the loop: per-day traffic counts for drift and flag-rate checks, the weekly report, and
-- the refit-due mark. Counts arrive aggregated through the hand-off queue (never from the
-- synchronous scoring path); each flush carries an id, recorded in count_flushes in the same D1
-- batch as its upserts, so a redelivered flush adds nothing the second time.

-- Bucket counts per day, model version and segment: one row per model column (or 'mahalanobisSq'
-- for the score) and bucket 0..9 against the artifact's reference decile edges.
CREATE TABLE drift_counts (
  day TEXT NOT NULL,
  model_version TEXT NOT NULL,
  segment TEXT NOT NULL,
  name TEXT NOT NULL,
  bucket INTEGER NOT NULL CHECK (bucket >= 0 AND bucket < 256),
  count INTEGER NOT NULL CHECK (count >= 0),
  PRIMARY KEY (day, model_version, segment, name, bucket)
) WITHOUT ROWID;

CREATE INDEX drift_counts_by_version ON drift_counts (model_version, day);

-- Payments scored and flagged per day, model version and segment (flag rate against the expected).
CREATE TABLE daily_volume (
  day TEXT NOT NULL,
  model_version TEXT NOT NULL,
  segment TEXT NOT NULL,
  scored INTEGER NOT NULL CHECK (scored >= 0),
  flagged INTEGER NOT NULL CHECK (flagged >= 0 AND flagged <= scored),
  PRIMARY KEY (day, model_version, segment)
) WITHOUT ROWID;

CREATE INDEX daily_volume_by_version ON daily_volume (model_version, day);

-- Flushes already counted (one row per flush id): the guard against double counting.
CREATE TABLE count_flushes (
  flush_id TEXT PRIMARY KEY,
  model_version TEXT NOT NULL,
  day TEXT NOT NULL,
  payments INTEGER NOT NULL,
  -- ISO-8601, UTC, when the consumer wrote it.
  received_at TEXT NOT NULL
);

-- The weekly report (cron): drift, flag rates, label counts, and whether a refit is due.
CREATE TABLE model_reports (
  id INTEGER PRIMARY KEY,
  -- ISO-8601, UTC.
  created_at TEXT NOT NULL,
  -- The cron expression that ran it, or 'manual'.
  run_by TEXT NOT NULL,
  -- The live version the report is about (NULL when none was active or it could not be read).
  model_version TEXT,
  status TEXT NOT NULL CHECK (status IN ('ok', 'error')),
  refit_due INTEGER NOT NULL DEFAULT 0 CHECK (refit_due IN (0, 1)),
  -- The whole report (JSON), or the error description.
  report_json TEXT NOT NULL
);

CREATE INDEX model_reports_by_time ON model_reports (created_at);

-- Versions marked as due for refit, with the reasons of the latest report that found it due.
CREATE TABLE refit_due (
  model_version TEXT PRIMARY KEY,
  -- First time a report marked it (ISO-8601, UTC); kept on later marks.
  marked_at TEXT NOT NULL,
  reasons_json TEXT NOT NULL,
  report_id INTEGER NOT NULL REFERENCES model_reports (id)
);
