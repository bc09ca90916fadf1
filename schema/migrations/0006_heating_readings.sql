-- Readings of the heating plan options (plan.heating, docs/daemon-core.md):
-- series says which forward series a 'dc' reading belongs to: 'up' (the
-- sweep, the one the fit uses; NULL in files from before this migration
-- means the same), 'dwell' (the extra readings of a pulse at its two dwell
-- times) or 'down' (the sweep down, compared with the sweep up).
-- dwell_s: for a reading taken in a pulse, the time from the output going on
-- to the reading (measured, not the planned figure); NULL for a reading at a
-- held bias. Columns only, no table rebuild: other migrations may add
-- columns to points too.
ALTER TABLE points ADD COLUMN series TEXT CHECK (series IS NULL OR series IN ('up', 'dwell', 'down'));
ALTER TABLE points ADD COLUMN dwell_s REAL;
