-- junco store, version 1. Times are UTC ISO-8601 text ("2031-04-02T21:14:03.120Z")
-- except points.t_s (Unix seconds, REAL). Unknown values are NULL, never NaN.
-- Only juncod opens this file; clients go through its socket.

CREATE TABLE lots (
  id          INTEGER PRIMARY KEY,
  name        TEXT NOT NULL UNIQUE,
  created_at  TEXT NOT NULL
);

CREATE TABLE parts (
  id          INTEGER PRIMARY KEY,
  lot_id      INTEGER NOT NULL REFERENCES lots(id),
  label       TEXT NOT NULL,
  slot        INTEGER,                      -- fixture slot of the last run
  created_at  TEXT NOT NULL,
  UNIQUE (lot_id, label)
);

-- Every instrument seen on the bench, identified by its *IDN? reply.
CREATE TABLE instruments (
  id            INTEGER PRIMARY KEY,
  role          TEXT NOT NULL,              -- source, meter, scanner, siggen, levelmeter
  address       TEXT NOT NULL,
  manufacturer  TEXT NOT NULL,
  model         TEXT NOT NULL,
  serial        TEXT NOT NULL,
  firmware      TEXT NOT NULL,
  first_seen    TEXT NOT NULL,
  last_seen     TEXT NOT NULL,
  UNIQUE (role, manufacturer, model, serial)
);

CREATE TABLE jobs (
  id             INTEGER PRIMARY KEY,
  plan           TEXT NOT NULL,             -- the validated plan, JSON
  state          TEXT NOT NULL CHECK (state IN
                   ('queued','running','paused','done','failed','cancelled','interrupted')),
  points_done    INTEGER NOT NULL DEFAULT 0,
  points_total   INTEGER NOT NULL,
  error          TEXT,                      -- last fault or reason, NULL when none
  submitted_uid  INTEGER,
  submitted_pid  INTEGER,
  submitted_at   TEXT NOT NULL,
  started_at     TEXT,
  finished_at    TEXT,
  updated_at     TEXT NOT NULL
);
CREATE INDEX jobs_state ON jobs(state, id);

-- One part's sweep within a job, with the fixture as it was.
CREATE TABLE runs (
  id           INTEGER PRIMARY KEY,
  job_id       INTEGER NOT NULL REFERENCES jobs(id),
  part_id      INTEGER NOT NULL REFERENCES parts(id),
  slot         INTEGER NOT NULL,
  fixture      TEXT NOT NULL,               -- JSON: bias_resistor_ohm, dc_return_ohm, ...
  temp_k       REAL,                        -- ambient stated in the plan
  state        TEXT NOT NULL CHECK (state IN ('running','done','stopped')),
  started_at   TEXT NOT NULL,
  finished_at  TEXT,
  UNIQUE (job_id, part_id)
);

-- Every reading. seq is the step index in the plan's expansion, so a resumed
-- run continues after its last committed seq and can never store one twice.
CREATE TABLE points (
  id          INTEGER PRIMARY KEY,
  run_id      INTEGER NOT NULL REFERENCES runs(id),
  seq         INTEGER NOT NULL,
  kind        TEXT NOT NULL CHECK (kind IN ('dc','ac','reverse')),
  set_value   REAL NOT NULL,                -- volts (voltage mode) or amperes (current mode)
  set_unit    TEXT NOT NULL CHECK (set_unit IN ('V','A')),
  supply_v    REAL,                         -- voltage programmed on the supply
  v           REAL,                         -- diode terminal voltage
  i_a         REAL,                         -- diode current
  ac_in_v     REAL,                         -- AC level at the fixture input
  ac_out_v    REAL,                         -- AC level at the fixture output
  ac_unit     TEXT,                         -- 'vrms' or 'vpp' for the two above
  freq_hz     REAL,
  temp_k      REAL,
  t_s         REAL NOT NULL,                -- Unix time of the reading
  flags       INTEGER NOT NULL DEFAULT 0,   -- bit 0 current limit, bit 1 retried, bit 2 off target
  UNIQUE (run_id, seq)
);

CREATE TABLE fits (
  id            INTEGER PRIMARY KEY,
  part_id       INTEGER NOT NULL REFERENCES parts(id),
  run_id        INTEGER REFERENCES runs(id),
  model         TEXT NOT NULL,              -- 'forward' (Is, n, Rs)
  status        TEXT NOT NULL,              -- fitting::to_string(FitStatus)
  message       TEXT,
  is_a REAL, is_a_se REAL,
  n REAL, n_se REAL,
  rs_ohm REAL, rs_ohm_se REAL,
  rsh_ohm REAL, rsh_ohm_se REAL,
  temp_k        REAL,
  cost          REAL,
  rms_residual  REAL,
  points_used   INTEGER NOT NULL,
  warnings      TEXT NOT NULL,              -- JSON array of strings
  detail        TEXT,                       -- JSON: correlation, excluded points
  created_at    TEXT NOT NULL
);
CREATE INDEX fits_part ON fits(part_id, id);
