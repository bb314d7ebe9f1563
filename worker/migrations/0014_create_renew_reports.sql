-- Reports of `isodense renew`, the scheduled weekly refit: one row per candidate and outcome
-- ('published' as the shadow, or 'held' back by the safety gate and kept for a person). The model
-- page shows the shadow's report beside the live/shadow agreement; a rerun with the identical
-- candidate files nothing new (the unique key), so a scheduler may run it twice.
CREATE TABLE renew_reports (
  id INTEGER PRIMARY KEY,
  -- ISO-8601, UTC: when the service filed it.
  filed_at TEXT NOT NULL,
  -- User name from the admin credential that ran renew.
  actor TEXT NOT NULL,
  candidate_version TEXT NOT NULL,
  live_version TEXT NOT NULL,
  outcome TEXT NOT NULL CHECK (outcome IN ('published', 'held')),
  -- The report as renew wrote it (shared-model/src/renew-report.ts).
  report_json TEXT NOT NULL,
  UNIQUE (candidate_version, outcome)
);

CREATE INDEX renew_reports_by_outcome ON renew_reports (outcome, id);
