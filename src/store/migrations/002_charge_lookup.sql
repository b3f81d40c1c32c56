-- 002: find the first reading at which a circuit's charge reaches a value
-- (due times) without scanning, and keep the estimated part of a crop's charge.
CREATE INDEX reading_cum ON reading(circuit_id, cum_ah, t) WHERE valid = 1;
ALTER TABLE crop ADD COLUMN estimated_ah REAL;
