-- 006: plans approved by a superintendent (`tankbook plan --approve`), each with
-- what was planned for each day, so later plans can show what changed since.
CREATE TABLE approved_plan (
    id          INTEGER PRIMARY KEY,
    approved_at INTEGER NOT NULL,
    approved_by TEXT NOT NULL,
    from_day    TEXT NOT NULL,   -- first production day, YYYY-MM-DD
    to_day      TEXT NOT NULL    -- last production day, YYYY-MM-DD
) STRICT;

CREATE TABLE approved_job (
    plan_id INTEGER NOT NULL REFERENCES approved_plan(id),
    day     TEXT NOT NULL,       -- production day, YYYY-MM-DD
    kind    TEXT NOT NULL CHECK (kind IN ('anode_change', 'harvest')),
    cell_id TEXT NOT NULL REFERENCES cell(id)
) STRICT;
CREATE INDEX approved_job_plan ON approved_job(plan_id);
