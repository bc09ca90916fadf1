-- junco lab database, version 1 (PostgreSQL). Every bench publishes the rows
-- of its SQLite store here (daemon/lab_publisher.cpp); tools read the views.
-- Tables are keyed by (bench, id): id is the bench's own local row id, so the
-- same lot label measured on two benches stays two lots, and a row published
-- twice (at-least-once delivery) is one upsert, never a duplicate.
-- Times are timestamptz; readings keep the bench's t_s (Unix seconds) as well.
-- Foreign keys are deferred to COMMIT: a batch arrives in one transaction.
-- (schema junco and junco.schema_migrations are created by lab/pg.cpp)

-- store_id: the bench's SQLite store that publishes under this name (its
-- lab_publishing.store_id); one store per bench name.
CREATE TABLE junco.benches (
  bench         text PRIMARY KEY,
  store_id      text NOT NULL,
  first_seen    timestamptz NOT NULL DEFAULT now(),
  last_publish  timestamptz NOT NULL DEFAULT now()
);

CREATE TABLE junco.lots (
  bench       text NOT NULL REFERENCES junco.benches(bench) DEFERRABLE INITIALLY DEFERRED,
  id          bigint NOT NULL,
  name        text NOT NULL,
  created_at  timestamptz NOT NULL,
  PRIMARY KEY (bench, id),
  UNIQUE (bench, name)
);
CREATE INDEX lots_name ON junco.lots(name);

CREATE TABLE junco.parts (
  bench       text NOT NULL,
  id          bigint NOT NULL,
  lot_id      bigint NOT NULL,
  label       text NOT NULL,
  slot        integer,
  created_at  timestamptz NOT NULL,
  PRIMARY KEY (bench, id),
  FOREIGN KEY (bench, lot_id) REFERENCES junco.lots(bench, id) DEFERRABLE INITIALLY DEFERRED
);
CREATE INDEX parts_lot ON junco.parts(bench, lot_id);

CREATE TABLE junco.jobs (
  bench          text NOT NULL REFERENCES junco.benches(bench) DEFERRABLE INITIALLY DEFERRED,
  id             bigint NOT NULL,
  plan           jsonb NOT NULL,
  state          text NOT NULL,
  points_done    bigint NOT NULL,
  points_total   bigint NOT NULL,
  error          text,
  submitted_uid  integer,
  submitted_pid  integer,
  submitted_at   timestamptz NOT NULL,
  started_at     timestamptz,
  finished_at    timestamptz,
  updated_at     timestamptz NOT NULL,
  PRIMARY KEY (bench, id)
);

CREATE TABLE junco.runs (
  bench        text NOT NULL,
  id           bigint NOT NULL,
  job_id       bigint NOT NULL,
  part_id      bigint NOT NULL,
  slot         integer NOT NULL,
  fixture      jsonb NOT NULL,
  temp_k       double precision,
  state        text NOT NULL,
  started_at   timestamptz NOT NULL,
  finished_at  timestamptz,
  PRIMARY KEY (bench, id),
  FOREIGN KEY (bench, job_id) REFERENCES junco.jobs(bench, id) DEFERRABLE INITIALLY DEFERRED,
  FOREIGN KEY (bench, part_id) REFERENCES junco.parts(bench, id) DEFERRABLE INITIALLY DEFERRED
);
CREATE INDEX runs_part ON junco.runs(bench, part_id);

-- The bench's points table: every reading.
CREATE TABLE junco.readings (
  bench       text NOT NULL,
  id          bigint NOT NULL,
  run_id      bigint NOT NULL,
  seq         bigint NOT NULL,
  kind        text NOT NULL,
  set_value   double precision NOT NULL,
  set_unit    text NOT NULL,
  supply_v    double precision,
  v           double precision,
  i_a         double precision,
  ac_in_v     double precision,
  ac_out_v    double precision,
  ac_unit     text,
  freq_hz     double precision,
  temp_k      double precision,
  t_s         double precision NOT NULL,
  flags       integer NOT NULL,
  PRIMARY KEY (bench, id),
  UNIQUE (bench, run_id, seq),
  FOREIGN KEY (bench, run_id) REFERENCES junco.runs(bench, id) DEFERRABLE INITIALLY DEFERRED
);

CREATE TABLE junco.fits (
  bench         text NOT NULL,
  id            bigint NOT NULL,
  part_id       bigint NOT NULL,
  run_id        bigint,
  model         text NOT NULL,
  status        text NOT NULL,
  message       text,
  is_a double precision, is_a_se double precision,
  n double precision, n_se double precision,
  rs_ohm double precision, rs_ohm_se double precision,
  rsh_ohm double precision, rsh_ohm_se double precision,
  temp_k        double precision,
  cost          double precision,
  rms_residual  double precision,
  points_used   integer NOT NULL,
  warnings      jsonb NOT NULL,
  detail        jsonb,
  created_at    timestamptz NOT NULL,
  cj0_f double precision, cj0_f_se double precision,
  vj_v double precision, vj_v_se double precision,
  m double precision, m_se double precision,
  PRIMARY KEY (bench, id),
  FOREIGN KEY (bench, part_id) REFERENCES junco.parts(bench, id) DEFERRABLE INITIALLY DEFERRED
);
CREATE INDEX fits_part ON junco.fits(bench, part_id, id DESC);

-- ---------------------------------------------------------------------------
-- The stable read-only interface for tools (docs/lab.md). Columns are only
-- ever added at the end, never renamed or removed.

-- The latest fit of every part (the one part.fit serves on its bench).
CREATE VIEW junco.part_fits AS
SELECT p.bench, l.name AS lot, p.label, p.id AS part_id, f.run_id, f.id AS fit_id,
       f.created_at AS fitted_at, f.model, f.status, f.message,
       f.is_a, f.is_a_se, f.n, f.n_se, f.rs_ohm, f.rs_ohm_se, f.rsh_ohm, f.rsh_ohm_se,
       f.cj0_f, f.cj0_f_se, f.vj_v, f.vj_v_se, f.m, f.m_se,
       f.temp_k, f.rms_residual, f.points_used, f.warnings
FROM junco.parts p
JOIN junco.lots l ON l.bench = p.bench AND l.id = p.lot_id
CROSS JOIN LATERAL (SELECT * FROM junco.fits f WHERE f.bench = p.bench AND f.part_id = p.id
                    ORDER BY f.id DESC LIMIT 1) f;

-- Every reading with the part and lot it belongs to.
CREATE VIEW junco.part_readings AS
SELECT r.bench, l.name AS lot, p.label, p.id AS part_id, r.run_id, ru.job_id, r.id AS reading_id, r.seq,
       r.kind, r.set_value, r.set_unit, r.supply_v, r.v, r.i_a, r.ac_in_v, r.ac_out_v, r.ac_unit,
       r.freq_hz, r.temp_k, r.t_s, to_timestamp(r.t_s) AS measured_at, r.flags
FROM junco.readings r
JOIN junco.runs ru ON ru.bench = r.bench AND ru.id = r.run_id
JOIN junco.parts p ON p.bench = ru.bench AND p.id = ru.part_id
JOIN junco.lots l ON l.bench = p.bench AND l.id = p.lot_id;

-- One row per lot and bench: how many parts it has there, how many of them
-- have a fit.
CREATE VIEW junco.lot_benches AS
SELECT l.bench, l.name AS lot, l.created_at,
       COALESCE(c.parts, 0) AS parts, COALESCE(c.fitted, 0) AS fitted
FROM junco.lots l
LEFT JOIN (SELECT p.bench, p.lot_id, count(*) AS parts,
                  count(*) FILTER (WHERE EXISTS (SELECT 1 FROM junco.fits f WHERE f.bench = p.bench AND f.part_id = p.id)) AS fitted
           FROM junco.parts p GROUP BY p.bench, p.lot_id) c ON c.bench = l.bench AND c.lot_id = l.id;

-- The read-only role for team tools: log in as a user granted junco_reader.
DO $$
BEGIN
  IF NOT EXISTS (SELECT FROM pg_roles WHERE rolname = 'junco_reader') THEN
    CREATE ROLE junco_reader NOLOGIN;
  END IF;
END $$;
GRANT USAGE ON SCHEMA junco TO junco_reader;
GRANT SELECT ON junco.schema_migrations TO junco_reader;  -- tools check the version they read
GRANT SELECT ON junco.part_fits, junco.part_readings, junco.lot_benches TO junco_reader;
