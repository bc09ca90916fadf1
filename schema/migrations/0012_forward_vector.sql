-- Vector readings at forward bias (plan.vector.forward_i_a, docs/daemon-core.md
-- "Vector readings"): a new kind 'forward_vector', the complex transfer at a
-- forward current (set_value the current in A, set_unit 'A', v and i_a the
-- DC reading that set the bias, ratio and phase_deg as the vectormeter read
-- them). SQLite cannot alter a CHECK constraint: the points table is rebuilt
-- with every row and id kept (as 0011 did), and the lab outbox trigger on
-- points (0003) is made again (dropping the table dropped it).
CREATE TABLE points_v4 (
  id          INTEGER PRIMARY KEY,
  run_id      INTEGER NOT NULL REFERENCES runs(id),
  seq         INTEGER NOT NULL,
  kind        TEXT NOT NULL CHECK (kind IN ('dc','ac','reverse','reverse_ac','reverse_vector','vector_open','vector_short','forward_vector')),
  set_value   REAL NOT NULL,                -- volts (voltage mode) or amperes (current mode, forward_vector)
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
INSERT INTO points_v4 (id, run_id, seq, kind, set_value, set_unit, supply_v, v, i_a, ac_in_v, ac_out_v, ac_unit, freq_hz, temp_k, t_s, flags, series, dwell_s, ratio, phase_deg)
  SELECT id, run_id, seq, kind, set_value, set_unit, supply_v, v, i_a, ac_in_v, ac_out_v, ac_unit, freq_hz, temp_k, t_s, flags, series, dwell_s, ratio, phase_deg FROM points;
DROP TABLE points;
ALTER TABLE points_v4 RENAME TO points;
CREATE TRIGGER lab_outbox_points_i AFTER INSERT ON points WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('points', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
