-- Review workflow: who holds each payment in the review store, what was decided, and an append-only
-- audit trail of every change. review_items (0001) stays as the scorer wrote it; the queue reads
-- review_status, one row per item, filled by a trigger on insert so the queue consumer needs no change.

CREATE TABLE review_status (
  item_id INTEGER PRIMARY KEY REFERENCES review_items (id),
  -- Copies of the review_items columns a queue line shows, filters and sorts by, so a page is read
  -- from one index and this table alone.
  transaction_id TEXT NOT NULL,
  model_version TEXT NOT NULL,
  segment TEXT NOT NULL,
  selection TEXT NOT NULL CHECK (selection IN ('flagged', 'audit')),
  account_ref TEXT,
  tail_probability REAL NOT NULL,
  mahalanobis_sq REAL NOT NULL,
  -- Raw `amount` feature when the model has one, else NULL (shown as is).
  amount REAL,
  -- Amount at risk for sorting and priority: the amount, or 0 when there is none.
  amount_at_risk REAL NOT NULL,
  -- scored_at as milliseconds since 1970-01-01 UTC.
  scored_ms INTEGER NOT NULL,
  -- Time-invariant part of the priority (docs/review.md):
  --   priority(now) = min(-log10 p, 15) + log10(1 + amount) + age in days
  --                 = priority_base + now_ms / 86 400 000,
  -- so ordering by priority_base is ordering by priority at any moment, and an index serves it.
  priority_base REAL NOT NULL,
  -- 1 once a decision stands (undo may set it back to 0).
  decided INTEGER NOT NULL DEFAULT 0 CHECK (decided IN (0, 1)),
  -- The live claim, if any: a claim is live while claim_expires_ms > now.
  claimed_by TEXT,
  claim_expires_ms INTEGER,
  -- The standing decision.
  outcome TEXT CHECK (outcome IN ('fraud', 'legitimate')),
  note TEXT,
  decided_by TEXT,
  decided_ms INTEGER,
  -- What an undo restores (JSON of the previous decided/outcome/note/decided_by/decided_ms), who may
  -- undo, and until when (ms).
  undo_json TEXT,
  undo_by TEXT,
  undo_until_ms INTEGER,
  CHECK ((decided = 1) = (outcome IS NOT NULL))
);

-- One index per sort order, led by `decided` so open/claimed pages and decided pages each walk a
-- contiguous range; item_id breaks ties and completes the keyset.
CREATE INDEX review_status_by_priority ON review_status (decided, priority_base, item_id);
CREATE INDEX review_status_by_tail ON review_status (decided, tail_probability, item_id);
CREATE INDEX review_status_by_amount ON review_status (decided, amount_at_risk, item_id);
CREATE INDEX review_status_by_age ON review_status (decided, scored_ms, item_id);
-- Covering index for the per-state counts under any filter: counting never touches the table.
CREATE INDEX review_status_counts ON review_status (decided, claim_expires_ms, segment, model_version, selection, scored_ms);
-- Today's decisions (summary) and the labelled-set export, in decision order.
CREATE INDEX review_status_by_decision ON review_status (decided, decided_ms, item_id);
-- The account's recent flags on the payment view.
CREATE INDEX review_status_by_account ON review_status (account_ref, scored_ms) WHERE account_ref IS NOT NULL;

-- The queue line for every item the consumer writes. Never fails the consumer's insert: a missing
-- or unparsable time falls back to received_at, then to now.
CREATE TRIGGER review_items_enter_queue AFTER INSERT ON review_items
BEGIN
  INSERT INTO review_status (item_id, transaction_id, model_version, segment, selection, account_ref, tail_probability, mahalanobis_sq, amount, amount_at_risk, scored_ms, priority_base)
  SELECT NEW.id, NEW.transaction_id, NEW.model_version, NEW.segment, NEW.selection, NEW.account_ref, NEW.tail_probability, NEW.mahalanobis_sq, amount, max(coalesce(amount, 0), 0),
         CAST(round(scored_s * 1000) AS INTEGER),
         min(-ln(max(NEW.tail_probability, 1e-300)) / ln(10), 15) + ln(1 + max(coalesce(amount, 0), 0)) / ln(10) - scored_s / 86400.0
  FROM (
    SELECT CASE WHEN json_valid(NEW.features_json) AND json_type(NEW.features_json, '$.amount') IN ('integer', 'real')
                THEN json_extract(NEW.features_json, '$.amount') END AS amount,
           coalesce(unixepoch(NEW.scored_at, 'subsec'), unixepoch(NEW.received_at, 'subsec'), unixepoch('now', 'subsec')) AS scored_s
  );
END;

-- Items already in the store when this migration runs.
INSERT INTO review_status (item_id, transaction_id, model_version, segment, selection, account_ref, tail_probability, mahalanobis_sq, amount, amount_at_risk, scored_ms, priority_base)
SELECT id, transaction_id, model_version, segment, selection, account_ref, tail_probability, mahalanobis_sq, amount, max(coalesce(amount, 0), 0),
       CAST(round(scored_s * 1000) AS INTEGER),
       min(-ln(max(tail_probability, 1e-300)) / ln(10), 15) + ln(1 + max(coalesce(amount, 0), 0)) / ln(10) - scored_s / 86400.0
FROM (
  SELECT id, transaction_id, model_version, segment, selection, account_ref, tail_probability, mahalanobis_sq,
         CASE WHEN json_valid(features_json) AND json_type(features_json, '$.amount') IN ('integer', 'real')
              THEN json_extract(features_json, '$.amount') END AS amount,
         coalesce(unixepoch(scored_at, 'subsec'), unixepoch(received_at, 'subsec'), unixepoch('now', 'subsec')) AS scored_s
  FROM review_items
);

-- Append-only audit trail: claims, releases, decisions (with from/to outcome and note) and undos.
-- Each row is written in the same D1 batch as the review_status change it records, with the same
-- condition, so a change never lands without its row nor a row without its change.
CREATE TABLE review_events (
  id INTEGER PRIMARY KEY,
  item_id INTEGER NOT NULL REFERENCES review_items (id),
  -- ISO-8601, UTC.
  at TEXT NOT NULL,
  actor TEXT NOT NULL,
  action TEXT NOT NULL CHECK (action IN ('claim', 'release', 'decide', 'undo')),
  from_outcome TEXT CHECK (from_outcome IN ('fraud', 'legitimate')),
  to_outcome TEXT CHECK (to_outcome IN ('fraud', 'legitimate')),
  note TEXT,
  model_version TEXT NOT NULL
);

CREATE INDEX review_events_by_item ON review_events (item_id, id);

CREATE TRIGGER review_events_no_update BEFORE UPDATE ON review_events
BEGIN
  SELECT RAISE(ABORT, 'review_events is append-only: rows cannot be changed');
END;

CREATE TRIGGER review_events_no_delete BEFORE DELETE ON review_events
BEGIN
  SELECT RAISE(ABORT, 'review_events is append-only: rows cannot be deleted');
END;
