-- Entries typed in the screens but not yet confirmed when the terminal went
-- away (closed, hung up, signalled): kept so nothing typed is lost, offered
-- back at the next start, deleted once taken up or thrown away. Not part of
-- the event log: a draft records nothing about the plant.
CREATE TABLE draft (
    id       INTEGER PRIMARY KEY,
    form     TEXT    NOT NULL,  -- which form, as the screens name it
    fields   TEXT    NOT NULL,  -- JSON array of [field, value as typed]
    by       TEXT,              -- who was logging, if anyone
    saved_at INTEGER NOT NULL,  -- unix seconds
    reason   TEXT    NOT NULL   -- why it was kept (terminal closed, SIGTERM, …)
);
