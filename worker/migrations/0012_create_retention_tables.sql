-- Retention of personal data (worker/src/retention/): decided review items, their notes and audit
-- content are deleted RETENTION_DAYS after the decision, but only once a complete label export has
-- taken them (a refit needs the labels), and every run is recorded by count.

-- Label exports (GET /v1/review/export): written when one starts, finished_at set when its last row
-- has gone out. A finished export that started at started_ms holds every item decided (committed)
-- before then; retention allows a margin for the time between a decision's clock and its commit.
CREATE TABLE label_exports (
  id INTEGER PRIMARY KEY,
  -- ISO-8601 UTC and the same instant in ms since 1970.
  started_at TEXT NOT NULL,
  started_ms INTEGER NOT NULL,
  finished_at TEXT,
  -- User name from the credential that asked.
  actor TEXT NOT NULL,
  format TEXT NOT NULL CHECK (format IN ('csv', 'ndjson')),
  -- The ?modelVersion filter, NULL for every version.
  model_version TEXT,
  -- Labelled rows written (set with finished_at).
  rows INTEGER
);

CREATE INDEX label_exports_finished ON label_exports (model_version, started_ms) WHERE finished_at IS NOT NULL;

-- One row per retention run (the cron, or POST /v1/retention/run), counts updated in the same D1
-- transaction as each batch they count, so a run cut short still says exactly what went.
CREATE TABLE retention_runs (
  id INTEGER PRIMARY KEY,
  started_at TEXT NOT NULL,
  finished_at TEXT,
  -- The cron expression, or the admin's user name.
  run_by TEXT NOT NULL,
  retention_days INTEGER NOT NULL,
  -- Items decided, and conflicts and shadow scores recorded, before this instant are due.
  cutoff_at TEXT NOT NULL,
  -- 'interrupted': found still running by a later run (the worker stopped mid-way; nothing is lost,
  -- the later run carries on).
  status TEXT NOT NULL DEFAULT 'running' CHECK (status IN ('running', 'done', 'more', 'failed', 'interrupted')),
  items_deleted INTEGER NOT NULL DEFAULT 0,
  notes_deleted INTEGER NOT NULL DEFAULT 0,
  events_erased INTEGER NOT NULL DEFAULT 0,
  conflicts_deleted INTEGER NOT NULL DEFAULT 0,
  shadow_scores_deleted INTEGER NOT NULL DEFAULT 0,
  -- Items past the retention kept because no finished label export holds them yet.
  kept_unexported INTEGER NOT NULL DEFAULT 0,
  -- Why anything was kept, or the failure (JSON); never the data.
  detail TEXT
);

CREATE INDEX retention_runs_by_time ON retention_runs (started_at);

-- Item ids of the batch being deleted or erased: filled and emptied inside one D1 transaction, so it
-- is empty whenever no batch runs (it only saves binding a hundred ids per statement).
CREATE TABLE privacy_batch (item_id INTEGER PRIMARY KEY);

-- Retention and erasure reads that would otherwise scan.
CREATE INDEX shadow_scores_scored_at ON shadow_scores (scored_at);
CREATE INDEX shadow_scores_transaction ON shadow_scores (transaction_id);
CREATE INDEX payment_conflicts_at ON payment_conflicts (at);
CREATE INDEX payment_conflicts_account ON payment_conflicts (account_ref) WHERE account_ref IS NOT NULL;
CREATE INDEX payment_conflicts_transaction ON payment_conflicts (transaction_id);
