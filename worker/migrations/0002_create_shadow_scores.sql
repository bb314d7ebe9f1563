-- Shadow comparisons: every payment scored while a shadow model is set, scored by both models.
-- The payment flow only ever sees the live model's answer; these rows are for deciding a promotion
-- (flag overlap, flag-rate change) before it happens.
CREATE TABLE shadow_scores (
  id INTEGER PRIMARY KEY,
  transaction_id TEXT NOT NULL,
  live_version TEXT NOT NULL,
  shadow_version TEXT NOT NULL,
  -- Segment keys actually used by each model ('*' = pooled).
  live_segment TEXT NOT NULL,
  shadow_segment TEXT NOT NULL,
  -- 1 when the model would send the payment to review, else 0.
  live_flagged INTEGER NOT NULL CHECK (live_flagged IN (0, 1)),
  shadow_flagged INTEGER NOT NULL CHECK (shadow_flagged IN (0, 1)),
  live_mahalanobis_sq REAL NOT NULL,
  shadow_mahalanobis_sq REAL NOT NULL,
  live_tail_probability REAL NOT NULL,
  shadow_tail_probability REAL NOT NULL,
  -- When the worker scored the payment (ISO-8601, UTC).
  scored_at TEXT NOT NULL,
  UNIQUE (transaction_id, shadow_version)
);

CREATE INDEX shadow_scores_versions ON shadow_scores (shadow_version, live_version, scored_at);
