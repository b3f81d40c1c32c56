-- 007: the forecast as of now reads each cell's state in index look-ups that do
-- not grow with the history (store/snapshot.rs). Each index holds the columns
-- the forecast reads, so a cell's state is read from the few index pages that
-- hold its latest records, never from the table rows of its whole history.
-- A cell's latest voltage and its shorts since the running crop began.
CREATE INDEX event_cell_kind ON event(cell_id, kind, at, volts, count);
-- A cell's running load.
CREATE INDEX anode_load_state ON anode_load(cell_id, set_at, ended_at, count, mean_kg);
-- A cell's running crop and its last measured efficiency.
CREATE INDEX crop_state ON crop(cell_id, started_at, ended_at, efficiency);
-- The cut-outs that still matter (open, or ended after the running load was
-- set): one range on their end for the whole plant, not every cut-out ever had.
CREATE INDEX cutout_end ON cutout(to_at, cell_id, from_at);
-- The weighings left out of learning in the warnings' window: only those rows,
-- not every weighing of the window.
CREATE INDEX learn_weighing_left_out ON learn_weighing(ended_at) WHERE left_out IS NOT NULL;
-- The readings the warnings name (a gap before them, or ignored inside an
-- outage): only those rows, so the warnings' window is not a scan of every reading in it.
CREATE INDEX reading_flagged ON reading(circuit_id, t) WHERE gap_before = 1 OR valid = 0;
