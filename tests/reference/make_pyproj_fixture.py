#!/usr/bin/env python3
"""Generate the pyproj reference fixture for ebbwise's coordinate transformations.

What it makes
-------------
``tests/fixtures/pyproj_transforms.csv``: an outside reference for the
coordinate transformations ebbwise performs, computed with pyproj (the Python
interface to PROJ), independently of ebbwise's own Rust code.

The file starts with a block of lines beginning with ``#`` that record the
pyproj version, the PROJ version it bundles, and the generation date (UTC).
Then comes the CSV header

    from_crs,to_crs,x_in,y_in,x_out,y_out

and one row per point. Every transformation uses ``always_xy=True``, so
``x`` is always longitude / easting and ``y`` is always latitude / northing,
whatever axis order the CRS definition declares. Floats are written with
Python's ``repr`` (shortest string that round-trips to the same double), so
no precision is lost.

Cases covered
-------------
* EPSG:4326 -> EPSG:32724 (WGS 84 / UTM zone 24S): points within +-0.3 deg of
  lon -36.0, lat -47.5, plus the central-meridian point lon -39, lat -47.5
  (which must give easting exactly 500000 m). Note that lon -36 is the
  eastern edge of zone 24 (-42..-36), so points east of it lie slightly
  outside the nominal zone; the projection is still well defined there.
* EPSG:32724 -> EPSG:4326: the inverse, for a few UTM 24S points.
* EPSG:4326 -> EPSG:32630 (WGS 84 / UTM zone 30N): three points.
* EPSG:4326 -> EPSG:3857 (WGS 84 / Pseudo-Mercator): two points.

How to run
----------
    pip install pyproj
    python3 tests/reference/make_pyproj_fixture.py

It overwrites tests/fixtures/pyproj_transforms.csv. Rust tests never run this
script and need neither Python nor pyproj: they read only the committed
fixture. Rerun it only to refresh the reference deliberately, and commit the
new CSV together with the versions recorded in its header (and update
tests/fixtures/README.md if they changed).
"""

import csv
import datetime
import math
import sys
from pathlib import Path

import pyproj
from pyproj import Transformer

REPO_ROOT = Path(__file__).resolve().parents[2]
OUT_PATH = REPO_ROOT / "tests" / "fixtures" / "pyproj_transforms.csv"

# (from_crs, to_crs, [(x_in, y_in), ...]) with x = lon/easting, y = lat/northing.
CASES = [
    (
        "EPSG:4326",
        "EPSG:32724",
        [
            # Around lon -36.0, lat -47.5 (within +-0.3 deg).
            (-36.0, -47.5),
            (-36.3, -47.5),
            (-35.7, -47.5),
            (-36.0, -47.8),
            (-36.0, -47.2),
            (-36.3, -47.8),
            (-35.7, -47.2),
            (-36.15, -47.35),
            # Central meridian of zone 24: easting must be exactly 500000 m.
            (-39.0, -47.5),
        ],
    ),
    (
        "EPSG:32724",
        "EPSG:4326",
        [
            (500000.0, 4740000.0),
            (510000.0, 4740000.0),
            (500000.0, 4750000.0),
            (490000.0, 4730000.0),
        ],
    ),
    (
        "EPSG:4326",
        "EPSG:32630",
        [
            (-3.0, 50.0),  # central meridian of zone 30: easting 500000 m
            (-1.5, 52.25),
            (-5.2, 48.1),
        ],
    ),
    (
        "EPSG:4326",
        "EPSG:3857",
        [
            (-36.0, -47.5),
            (-3.0, 50.0),
        ],
    ),
]


def fmt(value: float) -> str:
    """Full-precision text for a float (shortest round-tripping repr)."""
    if not math.isfinite(value):
        raise ValueError(f"non-finite transformation result: {value!r}")
    return repr(float(value))


def main() -> int:
    # Never fetch grids from the network: results must depend only on the
    # installed pyproj/PROJ (none of these transformations needs a grid).
    pyproj.network.set_network_enabled(False)

    generated = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d")
    header = [
        "# ebbwise reference fixture: coordinate transformations computed with pyproj.",
        f"# pyproj version: {pyproj.__version__}",
        f"# PROJ version (bundled with pyproj): {pyproj.proj_version_str}",
        f"# generated (UTC): {generated}",
        "# generator: python3 tests/reference/make_pyproj_fixture.py",
        "# axis order: always_xy=True -> x = longitude/easting, y = latitude/northing"
        " (degrees or metres)",
        "# floats: Python repr (shortest round-tripping decimal)",
    ]

    rows = []
    for from_crs, to_crs, points in CASES:
        transformer = Transformer.from_crs(from_crs, to_crs, always_xy=True)
        header.append(f"# {from_crs} -> {to_crs}: {transformer.description}")
        for x_in, y_in in points:
            x_out, y_out = transformer.transform(x_in, y_in, errcheck=True)
            rows.append(
                [from_crs, to_crs, fmt(x_in), fmt(y_in), fmt(x_out), fmt(y_out)]
            )

    OUT_PATH.parent.mkdir(parents=True, exist_ok=True)
    with OUT_PATH.open("w", newline="", encoding="utf-8") as fh:
        for line in header:
            fh.write(line + "\n")
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(["from_crs", "to_crs", "x_in", "y_in", "x_out", "y_out"])
        writer.writerows(rows)

    print(f"wrote {len(rows)} rows to {OUT_PATH}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
