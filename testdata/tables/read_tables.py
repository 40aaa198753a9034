#!/usr/bin/python3
"""Check that pandas reads ferry's CSV outputs with its defaults.

Run with Debian's interpreter and python3-pandas:

    /usr/bin/python3 testdata/tables/read_tables.py MANIFEST.json

MANIFEST.json is a list of {"path": ..., "columns": [...], "rows": N}, the
header and row count of each table as Go's encoding/csv reads it
(cmd/ferry/pandas_test.go writes it). Each table is read with
pandas.read_csv(path) and no other argument, as a user would, and must give
N rows and exactly those column names in that order. A comment line before
the header, for instance, would make pandas take the comment's pieces for
the column names. Exits 1, naming each table that reads wrong.
"""
import json
import sys

import pandas


def main():
    with open(sys.argv[1], encoding="utf-8") as f:
        manifest = json.load(f)
    bad = 0
    for t in manifest:
        df = pandas.read_csv(t["path"])
        got_cols = [str(c) for c in df.columns]
        if got_cols != t["columns"] or df.shape != (t["rows"], len(t["columns"])):
            bad += 1
            print(f"{t['path']}: pandas read shape {df.shape} with columns {got_cols}; "
                  f"want ({t['rows']}, {len(t['columns'])}) with {t['columns']}")
    if bad:
        sys.exit(1)
    print(f"pandas {pandas.__version__} read {len(manifest)} tables right")


if __name__ == "__main__":
    main()
