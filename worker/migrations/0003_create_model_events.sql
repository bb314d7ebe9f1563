-- Append-only log of every change to the published models: who did what, when, from which version
-- to which. Written before the change is made; `outcome` turns to 'failed' if the change then fails,
-- so every change that took effect has a row.
CREATE TABLE model_events (
  id INTEGER PRIMARY KEY,
  -- ISO-8601, UTC.
  at TEXT NOT NULL,
  -- User name from the admin credential that made the change.
  actor TEXT NOT NULL,
  action TEXT NOT NULL CHECK (action IN ('upload', 'activate', 'rollback', 'shadow-set', 'shadow-clear')),
  from_version TEXT,
  to_version TEXT,
  outcome TEXT NOT NULL DEFAULT 'applied' CHECK (outcome IN ('applied', 'failed')),
  detail TEXT
);

CREATE INDEX model_events_at ON model_events (at);
