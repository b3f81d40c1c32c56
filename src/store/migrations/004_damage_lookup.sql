-- 004: find entries this version cannot read without replaying the log, and
-- record restores.
-- Unknown kinds: range look-ups on this index between the kinds the code knows
-- (domain::history::EventKind::ALL, kept in code so a new kind needs no migration).
CREATE INDEX event_kind ON event(kind);
-- Times that do not decode: a partial index holding only those rows. The bounds
-- are RFC 3339's four-digit years, 0000-01-01T00:00:00Z to 9999-12-31T23:59:59Z
-- (store::FIRST_SECS and store::LAST_SECS); store::events repeats this WHERE
-- clause word for word so SQLite can use the index.
CREATE INDEX event_bad_time ON event(id)
    WHERE at NOT BETWEEN -62167219200 AND 253402300799
       OR recorded_at NOT BETWEEN -62167219200 AND 253402300799
       OR end_at NOT BETWEEN -62167219200 AND 253402300799;

-- Each `tankbook restore`: when, from which file, where the replaced database
-- was kept, and who did it.
CREATE TABLE restore_log (
    id          INTEGER PRIMARY KEY,
    restored_at INTEGER NOT NULL,
    source      TEXT NOT NULL,
    kept_copy   TEXT NOT NULL,
    restored_by TEXT NOT NULL
) STRICT;
