#!/usr/bin/env python3
"""Prints the spread of a lot's fitted n and Rs per bench, read from the lab
database's view junco.part_fits with psycopg2 (docs/lab.md).

    lab_lot_spread.py LOT [--db CONNINFO]

CONNINFO is a libpq connection string (default: $JUNCO_LAB, else libpq's own
defaults such as PGSERVICE); the password comes from ~/.pgpass or PGPASSFILE.
"""

import argparse
import os
import statistics
import sys

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))
import junco_lab  # noqa: E402


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("lot")
    ap.add_argument("--db", default=None, help="libpq connection string (default: $JUNCO_LAB)")
    args = ap.parse_args()
    with junco_lab.connect(args.db) as db:
        rows = [r for r in junco_lab.part_fits(db, args.lot) if r["status"] == "converged"]
    if not rows:
        print(f"lab_lot_spread: no converged fits of lot {args.lot} in the lab", file=sys.stderr)
        return 1
    benches = sorted({r["bench"] for r in rows})
    print(f"{'bench':<14} {'parts':>5} {'n mean':>9} {'n sd':>8} {'Rs mean/ohm':>12} {'Rs sd/ohm':>10}")
    for bench in benches + [None]:
        sel = [r for r in rows if bench is None or r["bench"] == bench]
        n = [r["n"] for r in sel]
        rs = [r["rs_ohm"] for r in sel]
        sd = (lambda xs: statistics.stdev(xs) if len(xs) > 1 else 0.0)
        print(f"{bench or '(all)':<14} {len(sel):>5} {statistics.fmean(n):>9.4f} {sd(n):>8.4f}"
              f" {statistics.fmean(rs):>12.4f} {sd(rs):>10.4f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
