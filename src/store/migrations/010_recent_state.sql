-- 010: the forecast as of a time reads the plant's recent records in one range
-- per table, by time (store/snapshot.rs), instead of a seek per cell along
-- indexes keyed by cell: on a long history each cell's latest records sit on a
-- leaf page of their own, so per-cell seeks read a page per cell and table
-- however short the forecast's own window is. Each index holds what the
-- snapshot reads, so the ranges never touch the table rows.
-- Loads set in the recent window (the running one is the latest set).
CREATE INDEX anode_load_recent ON anode_load(set_at, cell_id, ended_at, count, mean_kg);
-- Crops begun in the recent window (the running one and the last measured efficiency).
CREATE INDEX crop_recent ON crop(started_at, cell_id, ended_at, efficiency);
-- Voltages and shorts of the recent window, for the whole plant at once.
CREATE INDEX event_recent ON event(kind, at, cell_id, volts, count);
