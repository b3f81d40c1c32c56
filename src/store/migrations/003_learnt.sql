-- 003: what the plant's own weighings teach. Derived (rebuilt from the crops,
-- anode loads and readings whenever a weighing, an undo or a back-fill changes them).

-- One row per weighed crop ('crop') or weighed scrap ('scrap'): its charge, the
-- measured efficiency or anode factor, and why it is left out of learning (NULL: learnt from).
CREATE TABLE learn_weighing (
    cell_id    TEXT NOT NULL REFERENCES cell(id),
    kind       TEXT NOT NULL,
    started_at INTEGER NOT NULL,
    ended_at   INTEGER NOT NULL,
    charge_ah  REAL NOT NULL,
    weighed_kg REAL NOT NULL,
    count      INTEGER,
    set_kg     REAL,
    value      REAL NOT NULL,
    left_out   TEXT,
    z          REAL,
    PRIMARY KEY (cell_id, kind, started_at)
) STRICT;
CREATE INDEX learn_weighing_end ON learn_weighing(ended_at);

-- Each cell's values as used: value (NULL when the source is the layout, whose
-- value applies as of the forecast), source, weighings learnt, standard error,
-- and the section's scatter of one weighing.
CREATE TABLE cell_learnt (
    cell_id        TEXT PRIMARY KEY REFERENCES cell(id),
    cathode_value  REAL,
    cathode_source TEXT NOT NULL,
    cathode_n      INTEGER NOT NULL,
    cathode_se     REAL NOT NULL,
    cathode_sigma  REAL NOT NULL,
    anode_value    REAL,
    anode_source   TEXT NOT NULL,
    anode_n        INTEGER NOT NULL,
    anode_se       REAL NOT NULL,
    anode_sigma    REAL NOT NULL
) STRICT;
