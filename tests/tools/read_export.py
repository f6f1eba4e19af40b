#!/usr/bin/env python3
"""Read a `heatbound export` CSV file back with Python's own `csv` module, as a
spreadsheet user's script would, and print it as JSON for the Rust test
host-tools/tests/cli_export.rs to compare with the log.

    python3 tests/tools/read_export.py FILE.csv

Output: {"header": [...], "rows": [{column: value, ...}, ...]} where a text
column (`mode`, `verdict`, `suspect`) stays text, `host_time_utc` becomes Unix
milliseconds (parsed by `datetime.fromisoformat`, not by heatbound), an empty
cell becomes null, and every other cell a float. A cell that Python's float()
cannot read, or that reads as NaN or infinity, is an error (exit 1): the
export promises neither.

Standard library only.
"""

import csv
import json
import math
import sys
from datetime import datetime, timezone

TEXT = {"mode", "verdict", "suspect"}


def main(path):
    with open(path, newline="", encoding="utf-8") as f:
        reader = csv.reader(f)
        header = next(reader)
        rows = []
        for line, cells in enumerate(reader, start=2):
            if len(cells) != len(header):
                sys.exit(f"{path}: line {line}: {len(cells)} cells, header has {len(header)}")
            row = {}
            for name, cell in zip(header, cells):
                if name in TEXT:
                    row[name] = cell
                elif cell == "":
                    row[name] = None
                elif name == "host_time_utc":
                    if not cell.endswith("Z"):
                        sys.exit(f"{path}: line {line}: {name} {cell!r} is not UTC")
                    t = datetime.fromisoformat(cell[:-1] + "+00:00")
                    if t.tzinfo != timezone.utc:
                        sys.exit(f"{path}: line {line}: {name} {cell!r} is not UTC")
                    delta = t - datetime(1970, 1, 1, tzinfo=timezone.utc)
                    row[name] = (delta.days * 86400 + delta.seconds) * 1000 + delta.microseconds // 1000
                else:
                    x = float(cell)
                    if not math.isfinite(x):
                        sys.exit(f"{path}: line {line}: {name} is {cell!r}")
                    row[name] = x
            rows.append(row)
    json.dump({"header": header, "rows": rows}, sys.stdout)


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit("usage: read_export.py FILE.csv")
    main(sys.argv[1])
