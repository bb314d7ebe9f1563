-- Review store: payments handed off for human review, written by the queue consumer.
-- One row per (transaction, model version): the consumer inserts with ON CONFLICT DO NOTHING, so a
-- redelivered queue message or a payment scored twice under the same model never makes a second row.
CREATE TABLE review_items (
  id INTEGER PRIMARY KEY,
  transaction_id TEXT NOT NULL,
  model_version TEXT NOT NULL,
  -- Segment key whose Gaussian scored the payment ('*' = pooled model).
  segment TEXT NOT NULL,
  -- Pseudonymous account id supplied by the payment flow (never a card number); NULL if not sent.
  account_ref TEXT,
  -- The raw features object exactly as received (JSON text, feature name -> number).
  features_json TEXT NOT NULL,
  -- Natural-log density under the segment's Gaussian.
  log_density REAL NOT NULL,
  -- Squared Mahalanobis distance d^2.
  mahalanobis_sq REAL NOT NULL,
  -- P(chi2_n > d^2).
  tail_probability REAL NOT NULL,
  -- The d^2 cutoff in force when the payment was scored.
  cutoff_mahalanobis_sq REAL NOT NULL,
  -- Reasons as the model core returns them (JSON array).
  reasons_json TEXT NOT NULL,
  -- 'flagged': beyond the cutoff; 'audit': passed, but drawn into the random audit sample.
  selection TEXT NOT NULL CHECK (selection IN ('flagged', 'audit')),
  -- Probability that this payment was selected for review: 1 when flagged, the audit rate otherwise.
  -- Weight labels by 1 / inclusion_probability (Horvitz & Thompson 1952) when estimating recall.
  inclusion_probability REAL NOT NULL CHECK (inclusion_probability > 0 AND inclusion_probability <= 1),
  -- When the worker scored the payment (ISO-8601, UTC).
  scored_at TEXT NOT NULL,
  -- When the queue consumer wrote the row to the review store (ISO-8601, UTC).
  received_at TEXT NOT NULL,
  UNIQUE (transaction_id, model_version)
);

-- What the review queue filters and sorts by.
CREATE INDEX review_items_selection ON review_items (selection, scored_at);
CREATE INDEX review_items_tail_probability ON review_items (tail_probability);
CREATE INDEX review_items_scored_at ON review_items (scored_at);
CREATE INDEX review_items_model_version ON review_items (model_version);
CREATE INDEX review_items_segment ON review_items (segment, scored_at);
CREATE INDEX review_items_account_ref ON review_items (account_ref) WHERE account_ref IS NOT NULL;
