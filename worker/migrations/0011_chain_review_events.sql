-- The audit trail becomes a hash chain, so that erasure is possible and tampering stays visible.
--
-- Until now review_events was append-only by trigger, which made erasing an account's notes and
-- outcomes impossible. Now each event carries two digests, set once by the sealer
-- (worker/src/audit/audit-chain.ts) right after the event is written:
--   digest = SHA-256 of the event's content (id, item, time, actor, action, outcomes, note, model);
--   chain  = SHA-256 of (the previous event's chain, newline, this event's digest).
-- Erasure (an account's data on request) and retention (data past RETENTION_DAYS) turn an event
-- into a tombstone: the content goes, the time, the kind of change and both digests stay, so the
-- chain still verifies across it, while a changed, removed or inserted event breaks the first link
-- after it (GET /v1/audit/verify names that event).
--
-- The triggers stay as a guard against accidental writes: the only changes allowed are sealing an
-- unsealed event (content untouched) and tombstoning a sealed one (digests untouched).

CREATE TABLE review_events_chained (
  id INTEGER PRIMARY KEY,
  -- NULL once the event is a tombstone (the item itself is gone).
  item_id INTEGER REFERENCES review_items (id),
  -- ISO-8601, UTC. Kept by a tombstone.
  at TEXT NOT NULL,
  actor TEXT,
  -- Kept by a tombstone.
  action TEXT NOT NULL CHECK (action IN ('claim', 'release', 'decide', 'undo')),
  from_outcome TEXT CHECK (from_outcome IN ('fraud', 'legitimate')),
  to_outcome TEXT CHECK (to_outcome IN ('fraud', 'legitimate')),
  note TEXT,
  model_version TEXT,
  -- Lower-case hex SHA-256 digests, NULL until sealed (milliseconds after the write).
  digest TEXT,
  chain TEXT,
  -- Set when the content was erased: when, and why.
  erased_at TEXT,
  erased_by TEXT CHECK (erased_by IN ('erasure', 'retention')),
  CHECK ((erased_at IS NULL) = (erased_by IS NULL)),
  CHECK (erased_at IS NULL OR (item_id IS NULL AND actor IS NULL AND note IS NULL AND from_outcome IS NULL AND to_outcome IS NULL AND model_version IS NULL AND chain IS NOT NULL)),
  CHECK (erased_at IS NOT NULL OR (item_id IS NOT NULL AND actor IS NOT NULL AND model_version IS NOT NULL))
);

INSERT INTO review_events_chained (id, item_id, at, actor, action, from_outcome, to_outcome, note, model_version)
SELECT id, item_id, at, actor, action, from_outcome, to_outcome, note, model_version FROM review_events ORDER BY id;

DROP TABLE review_events;
ALTER TABLE review_events_chained RENAME TO review_events;

CREATE INDEX review_events_by_item ON review_events (item_id, id);
CREATE INDEX review_events_by_actor ON review_events (item_id, actor, action, at);
-- What the sealer reads: the few events written since it last ran.
CREATE INDEX review_events_unsealed ON review_events (id) WHERE chain IS NULL;

CREATE TRIGGER review_events_no_delete BEFORE DELETE ON review_events
BEGIN
  SELECT RAISE(ABORT, 'review_events is append-only: rows cannot be deleted (erasure leaves a tombstone)');
END;

CREATE TRIGGER review_events_no_update BEFORE UPDATE ON review_events
WHEN NOT (
  -- Sealing: digests set once, content untouched.
  (OLD.chain IS NULL AND NEW.chain IS NOT NULL AND NEW.digest IS NOT NULL AND NEW.erased_at IS NULL
   AND NEW.id = OLD.id AND NEW.item_id IS OLD.item_id AND NEW.at = OLD.at AND NEW.actor IS OLD.actor AND NEW.action = OLD.action
   AND NEW.from_outcome IS OLD.from_outcome AND NEW.to_outcome IS OLD.to_outcome AND NEW.note IS OLD.note AND NEW.model_version IS OLD.model_version)
  OR
  -- Tombstoning a sealed event: digests, time and kind of change untouched.
  (OLD.chain IS NOT NULL AND OLD.erased_at IS NULL AND NEW.erased_at IS NOT NULL
   AND NEW.id = OLD.id AND NEW.at = OLD.at AND NEW.action = OLD.action AND NEW.digest = OLD.digest AND NEW.chain = OLD.chain)
)
BEGIN
  SELECT RAISE(ABORT, 'review_events is append-only: rows cannot be changed (only sealed once, or erased to a tombstone once sealed)');
END;
