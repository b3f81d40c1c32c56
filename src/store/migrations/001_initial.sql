-- 001: the first schema. Never edit a migration that has shipped; add a new one.
CREATE TABLE plant_meta (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
) STRICT;

CREATE TABLE layout_version (
    id        INTEGER PRIMARY KEY,
    loaded_at INTEGER NOT NULL,
    source    TEXT NOT NULL,
    text      TEXT NOT NULL
) STRICT;

CREATE TABLE circuit (
    id       INTEGER PRIMARY KEY,
    name     TEXT NOT NULL UNIQUE,
    max_amps REAL NOT NULL,
    position INTEGER NOT NULL
) STRICT;

CREATE TABLE section (
    id         INTEGER PRIMARY KEY,
    circuit_id INTEGER NOT NULL REFERENCES circuit(id),
    name       TEXT NOT NULL,
    position   INTEGER NOT NULL,
    UNIQUE (circuit_id, name)
) STRICT;

CREATE TABLE cell (
    id         TEXT PRIMARY KEY,
    section_id INTEGER NOT NULL REFERENCES section(id),
    position   INTEGER NOT NULL,
    active     INTEGER NOT NULL DEFAULT 1
) STRICT;

-- Parameters apply from the time a layout is loaded; older rows stay for history.
CREATE TABLE cell_params (
    cell_id    TEXT NOT NULL REFERENCES cell(id),
    valid_from INTEGER NOT NULL,
    layout_id  INTEGER NOT NULL REFERENCES layout_version(id),
    params     TEXT NOT NULL,
    PRIMARY KEY (cell_id, valid_from)
) STRICT;

-- One row per rectifier reading, with the circuit's cumulative charge up to it
-- so the charge between two times is two look-ups.
CREATE TABLE reading (
    circuit_id INTEGER NOT NULL REFERENCES circuit(id),
    t          INTEGER NOT NULL,
    amps       REAL NOT NULL,
    cum_ah     REAL NOT NULL,
    valid      INTEGER NOT NULL,
    gap_before INTEGER NOT NULL,
    PRIMARY KEY (circuit_id, t)
) STRICT, WITHOUT ROWID;

CREATE TABLE import_batch (
    id          INTEGER PRIMARY KEY,
    imported_at INTEGER NOT NULL,
    source      TEXT NOT NULL,
    added       INTEGER NOT NULL,
    skipped     INTEGER NOT NULL
) STRICT;

-- The append-only event log: an undo appends a row with `voids` set, never a delete.
CREATE TABLE event (
    id          INTEGER PRIMARY KEY,
    kind        TEXT NOT NULL,
    cell_id     TEXT REFERENCES cell(id),
    circuit_id  INTEGER REFERENCES circuit(id),
    at          INTEGER NOT NULL,
    end_at      INTEGER,
    count       INTEGER,
    kg          REAL,
    amps        REAL,
    volts       REAL,
    logged_by   TEXT NOT NULL,
    forced      INTEGER NOT NULL,
    recorded_at INTEGER NOT NULL,
    voids       INTEGER REFERENCES event(id)
) STRICT;
CREATE INDEX event_cell ON event(cell_id, at);
CREATE INDEX event_circuit ON event(circuit_id, kind, at);
CREATE UNIQUE INDEX event_void ON event(voids) WHERE voids IS NOT NULL;

-- Derived from the event log by replaying a cell's events; rebuilt, never edited by hand.
CREATE TABLE anode_load (
    set_event INTEGER PRIMARY KEY REFERENCES event(id),
    cell_id   TEXT NOT NULL REFERENCES cell(id),
    set_at    INTEGER NOT NULL,
    count     INTEGER NOT NULL,
    mean_kg   REAL NOT NULL,
    ended_at  INTEGER,
    scrap_kg  REAL
) STRICT;
CREATE INDEX anode_load_cell ON anode_load(cell_id, set_at);

CREATE TABLE crop (
    cell_id       TEXT NOT NULL REFERENCES cell(id),
    started_at    INTEGER NOT NULL,
    ended_at      INTEGER,
    harvest_event INTEGER REFERENCES event(id),
    harvest_kg    REAL,
    charge_ah     REAL,
    efficiency    REAL,
    PRIMARY KEY (cell_id, started_at)
) STRICT;

CREATE TABLE cutout (
    event   INTEGER PRIMARY KEY REFERENCES event(id),
    cell_id TEXT NOT NULL REFERENCES cell(id),
    from_at INTEGER NOT NULL,
    to_at   INTEGER
) STRICT;
CREATE INDEX cutout_cell ON cutout(cell_id, from_at);
