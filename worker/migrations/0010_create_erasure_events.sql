-- Log of erasure requests for one account's data: who asked, when, which stores, and the outcome.
-- It holds none of the erased data: the account is kept only as the SHA-256 digest of its
-- reference, so "was account X erased, when, by whom?" is answered by hashing X, while the log
-- itself names nobody. Written before anything is erased; `outcome` then turns to 'done' or
-- 'failed'.
CREATE TABLE erasure_events (
  id INTEGER PRIMARY KEY,
  -- ISO-8601, UTC.
  at TEXT NOT NULL,
  -- User name from the admin credential that asked.
  actor TEXT NOT NULL,
  -- Lower-case hex SHA-256 of the account reference (UTF-8).
  subject_sha256 TEXT NOT NULL,
  -- JSON array of the stores erased, e.g. ["account-history"].
  scopes TEXT NOT NULL,
  outcome TEXT NOT NULL DEFAULT 'requested' CHECK (outcome IN ('requested', 'done', 'failed')),
  -- Counts only (e.g. payments removed per store) or the failure; never the data.
  detail TEXT
);

CREATE INDEX erasure_events_subject ON erasure_events (subject_sha256);
