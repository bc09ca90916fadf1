-- Vector readings (plan.vector, docs/daemon-core.md "Vector readings"): the
-- complex transfer ch2/ch1 the vectormeter reads, kept as it was read:
-- ratio (|V2/V1|, linear) and phase_deg (arg V2/V1 in degrees, positive:
-- channel 2 leads). New kinds: 'reverse_vector' (set_value the negative
-- bias, freq_hz the generator's frequency) and the fixture's standards read
-- at the start of each run, 'vector_open' and 'vector_short' (supply off,
-- set_value 0; which slots held them is in the job's plan).
-- SQLite cannot alter a CHECK constraint: the points table is rebuilt with
-- every row and id kept (as 0002 did), and the lab outbox trigger on points
-- (0003) is made again (dropping the table dropped it).
CREATE TABLE points_v3 (
  id          INTEGER PRIMARY KEY,
  run_id      INTEGER NOT NULL REFERENCES runs(id),
  seq         INTEGER NOT NULL,
  kind        TEXT NOT NULL CHECK (kind IN ('dc','ac','reverse','reverse_ac','reverse_vector','vector_open','vector_short')),
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
  series      TEXT CHECK (series IS NULL OR series IN ('up', 'dwell', 'down')),
  dwell_s     REAL,
  ratio       REAL,                         -- vector kinds: |V2/V1|
  phase_deg   REAL,                         -- vector kinds: arg(V2/V1), degrees
  UNIQUE (run_id, seq)
);
INSERT INTO points_v3 (id, run_id, seq, kind, set_value, set_unit, supply_v, v, i_a, ac_in_v, ac_out_v, ac_unit, freq_hz, temp_k, t_s, flags, series, dwell_s)
  SELECT id, run_id, seq, kind, set_value, set_unit, supply_v, v, i_a, ac_in_v, ac_out_v, ac_unit, freq_hz, temp_k, t_s, flags, series, dwell_s FROM points;
DROP TABLE points;
ALTER TABLE points_v3 RENAME TO points;
CREATE TRIGGER lab_outbox_points_i AFTER INSERT ON points WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('points', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
