-- How rare, past the reach of a double: log10 P(chi2_n > d^2) from the log of the incomplete gamma
-- function, which the scorer computes beside tail_probability. tail_probability underflows to 0 near
-- d^2 = 1500 (9 features), so every payment beyond that tied in the queue's "how rare" order; the
-- queue now sorts by this column instead.

-- As the scorer sent it. NULL on rows written before this column existed whose tail had underflowed
-- (their d^2 is stored but the model's degrees of freedom are not, so it cannot be worked back here).
ALTER TABLE review_items ADD COLUMN log10_tail_probability REAL;

UPDATE review_items SET log10_tail_probability = ln(tail_probability) / ln(10) WHERE tail_probability > 0;

-- The queue's copy and sort key. Rows whose value is unknown (NULL above) hold -1e308, "rarer than
-- any figure": an underflowed tail is below 1e-308, so they sort as the rarest, and the API shows them
-- as unknown (worker/src/review/queue-store.ts, UNKNOWN_LOG10_TAIL). NOT NULL keeps keyset paging simple.
ALTER TABLE review_status ADD COLUMN log10_tail_probability REAL NOT NULL DEFAULT -1e308;

UPDATE review_status SET log10_tail_probability = ln(tail_probability) / ln(10) WHERE tail_probability > 0;

-- The "how rare" order walks this index (the name is the one the queue asks for by sort key).
DROP INDEX review_status_by_tail;
CREATE INDEX review_status_by_tail ON review_status (decided, log10_tail_probability, item_id);

-- The queue line for every item the consumer writes, now with the log tail (as 0004 otherwise;
-- a message from an older deployment without it falls back to log10 of the tail probability).
DROP TRIGGER review_items_enter_queue;
CREATE TRIGGER review_items_enter_queue AFTER INSERT ON review_items
BEGIN
  INSERT INTO review_status (item_id, transaction_id, model_version, segment, selection, account_ref, tail_probability, log10_tail_probability, mahalanobis_sq, amount, amount_at_risk, scored_ms, priority_base)
  SELECT NEW.id, NEW.transaction_id, NEW.model_version, NEW.segment, NEW.selection, NEW.account_ref, NEW.tail_probability,
         coalesce(NEW.log10_tail_probability, CASE WHEN NEW.tail_probability > 0 THEN ln(NEW.tail_probability) / ln(10) END, -1e308),
         NEW.mahalanobis_sq, amount, max(coalesce(amount, 0), 0),
         CAST(round(scored_s * 1000) AS INTEGER),
         min(-ln(max(NEW.tail_probability, 1e-300)) / ln(10), 15) + ln(1 + max(coalesce(amount, 0), 0)) / ln(10) - scored_s / 86400.0
  FROM (
    SELECT CASE WHEN json_valid(NEW.features_json) AND json_type(NEW.features_json, '$.amount') IN ('integer', 'real')
                THEN json_extract(NEW.features_json, '$.amount') END AS amount,
           coalesce(unixepoch(NEW.scored_at, 'subsec'), unixepoch(NEW.received_at, 'subsec'), unixepoch('now', 'subsec')) AS scored_s
  );
END;
