-- junco: foreign_keys off
-- Multi-temperature runs (plan.temps_k, a chamber in the bench): one run per
-- (job, part, temperature) instead of per (job, part), with the chamber's
-- set point and its readback around the part's readings. runs.temp_k stays
-- the ambient the fit used: the plan's temp_k, or with a chamber the mean of
-- ambient_k and ambient_end_k. SQLite cannot alter a UNIQUE constraint, so
-- runs is rebuilt (every row and id kept) with foreign keys off (points and
-- fits refer to runs; migrations.cpp checks them before the commit), and
-- the lab outbox triggers on runs (0003) are made again.
CREATE TABLE runs_v2 (
  id            INTEGER PRIMARY KEY,
  job_id        INTEGER NOT NULL REFERENCES jobs(id),
  part_id       INTEGER NOT NULL REFERENCES parts(id),
  slot          INTEGER NOT NULL,
  fixture       TEXT NOT NULL,               -- JSON: bias_resistor_ohm, dc_return_ohm, ...
  temp_k        REAL,                        -- ambient the fit used
  state         TEXT NOT NULL CHECK (state IN ('running','done','stopped')),
  started_at    TEXT NOT NULL,
  finished_at   TEXT,
  temp_index    INTEGER NOT NULL DEFAULT 0,  -- index into plan.temps_k (0 without a chamber)
  setpoint_k    REAL,                        -- chamber set point; NULL without a chamber
  ambient_k     REAL,                        -- chamber readback before the part's first reading
  ambient_end_k REAL,                        -- chamber readback after its last reading
  UNIQUE (job_id, part_id, temp_index)
);
INSERT INTO runs_v2 (id, job_id, part_id, slot, fixture, temp_k, state, started_at, finished_at)
  SELECT id, job_id, part_id, slot, fixture, temp_k, state, started_at, finished_at FROM runs;
DROP TABLE runs;
ALTER TABLE runs_v2 RENAME TO runs;
CREATE TRIGGER lab_outbox_runs_i AFTER INSERT ON runs WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('runs', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_runs_u AFTER UPDATE ON runs WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('runs', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;

-- The temperature law fitted per part from its runs of one job at three or
-- more temperatures (fitting/temperature_fit.hpp): EG, XTI, TRS1 with their
-- standard errors (NULL se = held at the stated value), at tnom_k.
CREATE TABLE temperature_fits (
  id            INTEGER PRIMARY KEY,
  part_id       INTEGER NOT NULL REFERENCES parts(id),
  job_id        INTEGER NOT NULL REFERENCES jobs(id),
  status        TEXT NOT NULL,               -- ok | failed
  message       TEXT,
  eg_ev REAL, eg_ev_se REAL,
  xti REAL, xti_se REAL,
  trs1_per_k REAL, trs1_per_k_se REAL,
  tnom_k        REAL,
  detail        TEXT NOT NULL,               -- JSON: the whole fit (temperatures, residuals, correlation, what was held)
  created_at    TEXT NOT NULL
);
CREATE INDEX temperature_fits_part ON temperature_fits(part_id, id);
