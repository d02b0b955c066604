#!/usr/bin/env python3
"""Reference values for ebbwise's astronomical arguments and nodal corrections.

Writes ``tests/fixtures/harmonics/astro_pytmd.csv`` (long format):

    time_utc,quantity,constituent,value

* ``s_deg, h_deg, p_deg, N_deg, p1_deg`` (constituent empty): the mean
  longitudes of the Moon, Sun, lunar perigee, lunar ascending node and solar
  perigee, in degrees modulo 360, from
  ``pyTMD.astro.mean_longitudes(MJD, method="ASTRO5")`` (Meeus 1998
  polynomials in Julian centuries from J2000; the method pyTMD itself uses
  with ``corrections="FES"``). ``tau_deg`` is pyTMD's mean lunar time
  15 deg * UTC hour - s + h.
* ``V_deg, u_deg, f`` per constituent: the equilibrium argument V (degrees in
  [0, 360)), the nodal angle u (degrees in (-180, 180]) and the nodal factor
  f from ``pyTMD.constituents.arguments(MJD, names, corrections="FES",
  M1="Schureman", deltat=0)``.

Why corrections="FES": in pyTMD 3.0.9 this is the option whose f and u are
Schureman's (1958, SP-98) exact expressions through I, xi, nu, nu', nu''
(Table 2 / eqs. 73-79, 149, 197-235) for M2, N2, 2N2, MU2, NU2, K1, O1, Q1,
2Q1, RHO1, J1, OO1, K2, L2, Mm, Mf, and compounds of them; P1, S2, T2, Sa
and Ssa get f = 1, u = 0 as in Schureman. The other options use fitted
satellite series (OTIS, GOT) that differ from Schureman by up to ~0.01 in f.
M1="Schureman" picks Schureman's eq. 206-207 for M1 (pyTMD's default is
another formulation).

Time is UTC (deltat = 0): the polynomials are evaluated in Universal Time,
as is usual in tidal practice.

Constituent M1 here is the classical M1, Doodson number 155.655
(14.4966939 deg/h), which pyTMD names "m1a".

Run through make_all.sh (it makes the virtual environment). Rust tests read
only the committed CSV.
"""

import csv
import sys

import numpy as np
import pyTMD.astro

sys.dont_write_bytecode = True  # keep __pycache__ out of the repository
import _common as C  # noqa: E402

# Instants spread over 1980-2040 (more than three nodal cycles), most at odd
# times of day so that hour-angle errors show; J2000.0 is the polynomials'
# epoch.
INSTANTS = [
    "1980-03-15T07:42:19Z",
    "1986-10-02T23:05:00Z",
    "1993-06-30T13:37:41Z",
    "2000-01-01T12:00:00Z",
    "2004-08-21T04:17:53Z",
    "2009-09-09T09:09:09Z",
    "2015-05-05T15:55:55Z",
    "2021-12-24T20:48:06Z",
    "2026-06-14T09:30:00Z",
    "2033-02-28T18:01:30Z",
    "2040-07-04T03:58:12Z",
]

CONSTITUENTS = list(C.PYTMD_NAME)

OUT = C.FIXTURE_DIR / "astro_pytmd.csv"


def main():
    t_s = np.array([C.iso_to_unix_s(x) for x in INSTANTS], dtype=np.int64)
    mjd = C.unix_s_to_mjd(t_s)
    s, h, p, n, pp = pyTMD.astro.mean_longitudes(mjd, method="ASTRO5")
    hour = 24.0 * np.mod(mjd, 1.0)
    tau = np.mod(15.0 * hour - s + h, 360.0)
    V, u, f = C.pytmd_vuf(t_s, CONSTITUENTS)

    C.FIXTURE_DIR.mkdir(parents=True, exist_ok=True)
    with OUT.open("w", newline="") as fh:
        fh.write(C.version_line() + "\n")
        fh.write(
            "# pyTMD.astro.mean_longitudes(MJD, method='ASTRO5'); "
            "pyTMD.constituents.arguments(MJD, names, corrections='FES', "
            "M1='Schureman', deltat=0.0)\n"
        )
        fh.write(
            "# angles in degrees; V in [0,360), u in (-180,180]; time UTC; "
            "M1 = Doodson 155.655 (pyTMD 'm1a')\n"
        )
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["time_utc", "quantity", "constituent", "value"])
        for i, iso in enumerate(INSTANTS):
            for q, arr in (
                ("s_deg", s),
                ("h_deg", h),
                ("p_deg", p),
                ("N_deg", n),
                ("p1_deg", pp),
                ("tau_deg", tau),
            ):
                w.writerow([iso, q, "", repr(float(arr[i]))])
            for k, name in enumerate(CONSTITUENTS):
                w.writerow([iso, "V_deg", name, repr(float(V[i, k]))])
                w.writerow([iso, "u_deg", name, repr(float(u[i, k]))])
                w.writerow([iso, "f", name, repr(float(f[i, k]))])
    print(f"wrote {OUT.relative_to(C.REPO_ROOT)}: {len(INSTANTS)} instants, "
          f"{len(CONSTITUENTS)} constituents")


if __name__ == "__main__":
    main()
