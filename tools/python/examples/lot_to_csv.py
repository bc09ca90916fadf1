#!/usr/bin/env python3
"""Writes a lot's fitted parts to CSV: one row per part with Is, n, Rs and
their standard errors, and Vf / rd at chosen currents.

    lot_to_csv.py LOT OUT.csv [--socket PATH] [--at 0.001,0.01]

Parts without a usable fit are listed with status and empty numbers.
"""

import argparse
import csv
import os
import sys

# The client next to this directory (source tree, share/junco/python), else
# the installed package (pip install tools/python).
sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))
from junco_client import Client, RpcError  # noqa: E402


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("lot")
    ap.add_argument("out")
    ap.add_argument("--socket", default=None, help="juncod's socket (default: $JUNCO_SOCKET or the standard path)")
    ap.add_argument("--at", default="0.001,0.01", help="forward currents in A for Vf and rd, comma-separated")
    args = ap.parse_args()
    currents = [float(x) for x in args.at.split(",")]

    columns = ["part_id", "label", "slot", "status", "is_a", "is_a_se", "n", "n_se", "rs_ohm", "rs_ohm_se"]
    for i in currents:
        columns += [f"vf_v@{i:g}A", f"rd_ohm@{i:g}A"]
    with Client(args.socket) as c:
        parts = c.part_list(lot=args.lot)["parts"]
        if not parts:
            print(f"lot_to_csv: no parts in lot {args.lot}", file=sys.stderr)
            return 1
        with open(args.out, "w", newline="") as f:
            w = csv.DictWriter(f, fieldnames=columns)
            w.writeheader()
            for p in parts:
                row = {"part_id": p["part_id"], "label": p["label"], "slot": p["slot"]}
                try:
                    fit = c.part_fit(part_id=p["part_id"])
                    row["status"] = fit["status"]
                    for k in ("is_a", "n", "rs_ohm"):
                        row[k] = fit[k]["value"]
                        row[k + "_se"] = fit[k]["std_error"]
                    figs = c.part_figures(part_id=p["part_id"], currents_a=currents)["figures"]
                    for i, fig in zip(currents, figs):
                        row[f"vf_v@{i:g}A"] = fig["vf_v"]["value"]
                        row[f"rd_ohm@{i:g}A"] = fig["rd_ohm"]["value"]
                except RpcError as e:
                    row["status"] = "no fit: " + e.message
                w.writerow(row)
    print(f"lot_to_csv: {len(parts)} part(s) of {args.lot} written to {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
