-- Off-state readings: the AC levels at a reverse bias (kind 'reverse_ac':
-- set_value is the negative bias, freq_hz and ac_* as for 'ac'), and the
-- junction capacitance law CJO·(1 + Vr/VJ)^−M fitted from them, stored with
-- the part's forward fit (NULL when the run had no off-state readings).
-- SQLite cannot alter a CHECK constraint: the points table is rebuilt, with
-- every row and id kept.
CREATE TABLE points_v2 (
  id          INTEGER PRIMARY KEY,
  run_id      INTEGER NOT NULL REFERENCES runs(id),
  seq         INTEGER NOT NULL,
  kind        TEXT NOT NULL CHECK (kind IN ('dc','ac','reverse','reverse_ac')),
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
INSERT INTO points_v2 (id, run_id, seq, kind, set_value, set_unit, supply_v, v, i_a, ac_in_v, ac_out_v, ac_unit, freq_hz, temp_k, t_s, flags)
  SELECT id, run_id, seq, kind, set_value, set_unit, supply_v, v, i_a, ac_in_v, ac_out_v, ac_unit, freq_hz, temp_k, t_s, flags FROM points;
DROP TABLE points;
ALTER TABLE points_v2 RENAME TO points;

ALTER TABLE fits ADD COLUMN cj0_f REAL;
ALTER TABLE fits ADD COLUMN cj0_f_se REAL;
ALTER TABLE fits ADD COLUMN vj_v REAL;
ALTER TABLE fits ADD COLUMN vj_v_se REAL;
ALTER TABLE fits ADD COLUMN m REAL;
ALTER TABLE fits ADD COLUMN m_se REAL;
