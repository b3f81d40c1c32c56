-- 008: a cell's open anode load, crop and cut-out without reading its closed
-- ones: an entry at the end of a cell's history is replayed over these alone
-- (store/append.rs repeats each WHERE clause word for word so SQLite uses them).
CREATE INDEX anode_load_open ON anode_load(cell_id) WHERE ended_at IS NULL;
CREATE INDEX crop_open ON crop(cell_id) WHERE ended_at IS NULL;
CREATE INDEX cutout_open ON cutout(cell_id) WHERE to_at IS NULL;
