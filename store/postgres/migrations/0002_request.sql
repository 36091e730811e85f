-- Schema version 2: an interleaved impression's kept request
-- (experiment.keep_requests), encoded by store.AppendRequest; NULL when
-- none was kept. It is deleted with its row by retention.
ALTER TABLE riffle_impressions ADD COLUMN request bytea;
