"""Shared helpers for the harmonic-analysis reference generators.

Times are handled as integer UTC seconds since 1970-01-01T00:00:00Z (POSIX
time, no leap seconds), the same clock ebbwise uses internally. pyTMD takes a
Modified Julian Day; MJD = 40587 + t_s / 86400 on that clock, so pyTMD's
"hour of the day" is the UTC hour (deltat = 0: Universal Time, not
Terrestrial Time, as in tidal practice).
"""

import datetime
import sys
from importlib import metadata
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO_ROOT = HERE.parents[2]
FIXTURE_DIR = REPO_ROOT / "tests" / "fixtures" / "harmonics"

# pyTMD options used everywhere: Schureman's (1958) nodal formulas.
# corrections="FES" selects, in pyTMD 3.0.9, the Schureman expressions through
# the orbital quantities I, xi, nu, nu', nu'' (and Ra, R for L2, Qa, Q for M1)
# for every constituent family ebbwise tabulates; it also makes pyTMD use its
# "ASTRO5" mean longitudes (Meeus polynomials). M1="Schureman" selects
# Schureman's eq. 206-207 for M1 instead of pyTMD's default.
PYTMD_OPTIONS = {"corrections": "FES", "M1": "Schureman", "deltat": 0.0}

# ebbwise name -> pyTMD name. M1 is the classical M1 of Doodson number 155.655
# (speed 14.4966939 deg/h), which pyTMD calls "m1a"; pyTMD's "m1" is 155.555.
PYTMD_NAME = {
    "M2": "m2",
    "S2": "s2",
    "N2": "n2",
    "K2": "k2",
    "K1": "k1",
    "O1": "o1",
    "P1": "p1",
    "Q1": "q1",
    "M4": "m4",
    "MS4": "ms4",
    "MN4": "mn4",
    "M6": "m6",
    "2N2": "2n2",
    "MU2": "mu2",
    "NU2": "nu2",
    "L2": "l2",
    "T2": "t2",
    "J1": "j1",
    "M1": "m1a",
    "OO1": "oo1",
    "MF": "mf",
    "MM": "mm",
    "SSA": "ssa",
    "SA": "sa",
    "2Q1": "2q1",
    "RHO1": "rho1",
}

MJD_UNIX_EPOCH = 40587.0


def versions():
    """Versions of the libraries and interpreter that made the numbers."""
    out = {"python": sys.version.split()[0]}
    for pkg in ("pyTMD", "utide", "numpy", "scipy", "timescale"):
        try:
            out[pkg] = metadata.version(pkg)
        except metadata.PackageNotFoundError:
            out[pkg] = "absent"
    return out


def version_line():
    v = versions()
    return "# generated with " + ", ".join(f"{k} {v[k]}" for k in v)


def iso_to_unix_s(iso):
    """'2025-03-03T05:00:00Z' -> integer seconds since 1970 (UTC)."""
    dt = datetime.datetime.strptime(iso, "%Y-%m-%dT%H:%M:%SZ")
    dt = dt.replace(tzinfo=datetime.timezone.utc)
    return int(dt.timestamp())


def unix_s_to_iso(t_s):
    dt = datetime.datetime.fromtimestamp(int(t_s), tz=datetime.timezone.utc)
    return dt.strftime("%Y-%m-%dT%H:%M:%SZ")


def unix_s_to_mjd(t_s):
    t_s = np.asarray(t_s, dtype=np.int64)
    # Split whole days and the remainder so the fraction of the day keeps
    # full precision.
    days, rem = np.divmod(t_s, 86400)
    return MJD_UNIX_EPOCH + days.astype(np.float64) + rem.astype(np.float64) / 86400.0


def pytmd_vuf(t_s, names):
    """pyTMD's equilibrium argument V (deg), nodal angle u (deg) and factor f.

    Returns three arrays of shape (len(t_s), len(names)). V is in [0, 360),
    u in (-180, 180].
    """
    import pyTMD.constituents as pc

    mjd = np.atleast_1d(unix_s_to_mjd(t_s))
    pu, pf, G = pc.arguments(mjd, [PYTMD_NAME[n] for n in names], **PYTMD_OPTIONS)
    V = np.mod(G, 360.0)
    u = wrap180(np.degrees(pu))
    return V, u, pf


def wrap180(x_deg):
    y = np.mod(np.asarray(x_deg) + 180.0, 360.0) - 180.0
    return np.where(y == -180.0, 180.0, y)
