-- One analyst's recent decisions and undos on one item, for the bound on how often a decision may
-- flip (worker/src/review/actions.ts, DECISION_CHANGE_LIMIT): a range of this index, never a scan of
-- the item's whole trail. The trail itself is read in pages, newest first, along review_events_by_item.
CREATE INDEX review_events_by_actor ON review_events (item_id, actor, action, at);
