"""Reading the junco lab database (PostgreSQL) from Python.

The benches publish into schema ``junco``; tools read its stable views
(docs/lab.md): ``junco.part_fits`` (the latest fit of every part, per bench),
``junco.part_readings`` and ``junco.lot_benches``. Any PostgreSQL driver
works; this module uses psycopg2 (Debian: python3-psycopg2).

    import junco_lab
    with junco_lab.connect("service=junco-lab") as db:
        for row in junco_lab.part_fits(db, "WREN-0912"):
            print(row["bench"], row["label"], row["n"], row["rs_ohm"])

The connection string is libpq's; give the password the libpq way
(~/.pgpass, PGPASSFILE, a service file), never in code.
"""

import os

import psycopg2
import psycopg2.extras


def connect(conninfo=None):
    """A read-only session on the lab database ($JUNCO_LAB or libpq's defaults)."""
    db = psycopg2.connect(conninfo if conninfo is not None else os.environ.get("JUNCO_LAB", ""))
    db.set_session(readonly=True, autocommit=True)
    return db


def _rows(db, sql, params):
    with db.cursor(cursor_factory=psycopg2.extras.RealDictCursor) as cur:
        cur.execute(sql, params)
        return [dict(r) for r in cur.fetchall()]


def lots(db):
    """Every lot, once per bench that measured it."""
    return _rows(db, "SELECT lot, bench, parts, fitted, created_at FROM junco.lot_benches ORDER BY lot, bench", ())


def part_fits(db, lot, bench=None):
    """The latest fit of each part of `lot` (all benches unless `bench`)."""
    return _rows(db, "SELECT * FROM junco.part_fits WHERE lot = %s AND (%s::text IS NULL OR bench = %s)"
                     " ORDER BY bench, label", (lot, bench, bench))


def part_readings(db, bench, part_id):
    """Every reading of one part on one bench, in measuring order."""
    return _rows(db, "SELECT * FROM junco.part_readings WHERE bench = %s AND part_id = %s ORDER BY run_id, seq",
                 (bench, part_id))
