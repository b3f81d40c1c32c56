-- 007: the forecast as of now reads each cell's state in index look-ups that do
-- not grow with the history (store/snapshot.rs).
-- A cell's latest voltage and its shorts since the running crop began: a seek on
-- (cell, kind, time) instead of a walk back through all the cell's entries.
CREATE INDEX event_cell_kind ON event(cell_id, kind, at);
-- The cut-outs that still matter (open, or ended after the running load was
-- set): one range on their end for the whole plant, not every cut-out ever had.
CREATE INDEX cutout_end ON cutout(to_at);
