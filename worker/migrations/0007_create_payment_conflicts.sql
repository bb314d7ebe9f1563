-- Transaction ids sent again, inside the idempotency window, with other features, segment or
-- accountRef than when first seen. The payment flow got 409; analysts see these rows on the payment
-- view (when the first version is in the review store) because a payment whose content changes under
-- one id is worth a look. Written by the queue consumer, idempotently.
CREATE TABLE payment_conflicts (
  id INTEGER PRIMARY KEY,
  transaction_id TEXT NOT NULL,
  -- ISO-8601, UTC: when the id was first seen, and when the conflicting repeat came.
  first_seen_at TEXT NOT NULL,
  at TEXT NOT NULL,
  -- SHA-256 of the first and of the refused content (features with sorted keys, segment, accountRef).
  first_content_hash TEXT NOT NULL,
  content_hash TEXT NOT NULL,
  -- Live model when the repeat came.
  model_version TEXT NOT NULL,
  -- The refused repeat's content, as received.
  segment TEXT,
  account_ref TEXT,
  features_json TEXT NOT NULL,
  UNIQUE (transaction_id, at, content_hash)
);
