-- Lab outbox: every committed insert or update of a lot, part, job, run,
-- reading or fit leaves (table, row id) here, in the same transaction, so the
-- lab publisher (daemon/lab_publisher.cpp) can send it to the lab database
-- and delete the entry only after the lab has committed it: at-least-once
-- delivery, made exactly-once in effect by upserts keyed by (bench, id).
-- The triggers add an entry only while lab_publishing.enabled = 1 (juncod with
-- lab.database set); a bench without a lab database keeps no outbox.
-- store_id names this store file in the lab: a bench name already used by
-- another store (a bench rebuilt with a new, empty file, or a copied config)
-- is refused instead of overwriting that store's rows, whose ids it reuses.
CREATE TABLE lab_publishing (
  one       INTEGER PRIMARY KEY CHECK (one = 1),
  enabled   INTEGER NOT NULL DEFAULT 0,
  store_id  TEXT NOT NULL
);
INSERT INTO lab_publishing(one, enabled, store_id) VALUES (1, 0, lower(hex(randomblob(16))));

CREATE TABLE lab_outbox (
  seq        INTEGER PRIMARY KEY AUTOINCREMENT,
  tbl        TEXT NOT NULL,               -- lots, parts, jobs, runs, points, fits
  row_id     INTEGER NOT NULL,
  queued_at  REAL NOT NULL                -- Unix seconds, for the publishing lag
);

CREATE TRIGGER lab_outbox_lots_i AFTER INSERT ON lots WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('lots', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_parts_i AFTER INSERT ON parts WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('parts', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_parts_u AFTER UPDATE ON parts WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('parts', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_jobs_i AFTER INSERT ON jobs WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('jobs', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_jobs_u AFTER UPDATE ON jobs WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('jobs', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_runs_i AFTER INSERT ON runs WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('runs', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_runs_u AFTER UPDATE ON runs WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('runs', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_points_i AFTER INSERT ON points WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('points', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_fits_i AFTER INSERT ON fits WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('fits', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
CREATE TRIGGER lab_outbox_fits_u AFTER UPDATE ON fits WHEN (SELECT enabled FROM lab_publishing) = 1
BEGIN INSERT INTO lab_outbox(tbl, row_id, queued_at) VALUES ('fits', NEW.id, (julianday('now') - 2440587.5) * 86400.0); END;
