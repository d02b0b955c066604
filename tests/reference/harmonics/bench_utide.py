#!/usr/bin/env python3
"""Read a record CSV and analyse it with UTide: the Python side of a timing
benchmark against ``ebbwise analyse`` (time the whole process, e.g. with
hyperfine or ``/usr/bin/time``, on the same machine as ebbwise).

    /work/venv-ref/bin/python tests/reference/harmonics/bench_utide.py \
        tests/fixtures/harmonics/record_1y.csv

The record is ``time_utc,height_m`` (ISO 8601 UTC, metres; lines starting
with ``#`` are skipped). The call is the one the fixtures use:
``utide.solve(t, h, lat=48.38, nodal=True, trend=False, method='ols',
conf_int='linear', constit='auto')``. It prints one line: the number of
samples and constituents, and the seconds spent reading and in solve.
"""

import csv
import sys
import time

import numpy as np


def main(argv):
    if len(argv) != 2:
        print("usage: bench_utide.py RECORD.csv", file=sys.stderr)
        return 2
    t0 = time.perf_counter()
    import utide

    t_import = time.perf_counter()
    times, heights = [], []
    with open(argv[1]) as fh:
        for row in csv.DictReader(line for line in fh if not line.startswith("#")):
            times.append(row["time_utc"].rstrip("Z"))
            heights.append(float(row["height_m"]))
    t = np.array(times, dtype="datetime64[s]")
    h = np.array(heights)
    t_read = time.perf_counter()
    coef = utide.solve(
        t,
        h,
        lat=48.38,
        nodal=True,
        trend=False,
        method="ols",
        conf_int="linear",
        constit="auto",
        verbose=False,
    )
    t_solve = time.perf_counter()
    print(
        f"{len(h)} samples, {len(coef.name)} constituents; import {t_import - t0:.3f} s, "
        f"read {t_read - t_import:.3f} s, solve {t_solve - t_read:.3f} s"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
