#!/usr/bin/env python3
"""Synthetic tide records with known constants, and UTide's analysis of them.

For each record (a 29-day and a 1-year hourly record) it writes, under
``tests/fixtures/harmonics/``:

* ``record_<name>.csv`` -- ``time_utc,height_m``: ISO 8601 UTC times, heights
  in metres rounded to 0.1 mm. Made as

      h(t) = Z0 + sum_k f_k(t) H_k cos(V_k(t) + u_k(t) - G_k) + noise

  with V, u, f from pyTMD per sample (``pyTMD.constituents.arguments``,
  corrections="FES", i.e. Schureman's nodal formulas; see
  make_astro_fixture.py), so H and G are amplitudes and Greenwich phase lags
  (UTC) in the standard convention. Noise: Gaussian, sigma 0.02 m, numpy
  ``default_rng(SEED)`` with a fixed seed per record.
* ``true_<name>.csv`` -- ``constituent,amplitude_m,phase_deg``: the constants
  the record was made from (Z0 is the row with phase 0).
* ``utide_<name>.csv`` -- ``constituent,amplitude_m,phase_deg,amp_ci_m,
  phase_ci_deg``: UTide's result for the record as written (after rounding),
  from ``utide.solve(t, h, lat=LAT, nodal=True, trend=False, method='ols',
  conf_int='linear', constit='auto')``. Rows are in order of frequency, the
  first row is Z0 (UTide's ``coef.mean``, CIs NaN). The constituents listed
  are exactly the set UTide picked (also listed in a ``#`` line). UTide's
  CIs are 95 % half-widths (1.96 sigma), from its linearised error
  propagation with band-averaged residual spectra (its default white=False).
  Phases are Greenwich lags referred to UTC, because t is given in UTC.

UTide's own nodal/satellite corrections (Foreman's, latitude dependent) are
not identical to Schureman's used to make the records: that difference is
part of what a comparison sees.
"""

import csv
import sys

import numpy as np

sys.dont_write_bytecode = True  # keep __pycache__ out of the repository
import _common as C  # noqa: E402

LAT_DEG = 48.38
START = "2025-03-03T05:00:00Z"
Z0_M = 1.95
NOISE_SIGMA_M = 0.02

# constituent -> (amplitude m, Greenwich phase lag deg)
TRUE = {
    "M2": (1.20, 112.0),
    "S2": (0.42, 151.0),
    "N2": (0.24, 93.0),
    "K2": (0.11, 148.0),
    "K1": (0.16, 61.0),
    "O1": (0.11, 317.0),
    "P1": (0.05, 55.0),
    "Q1": (0.02, 281.0),
    "M4": (0.06, 204.0),
    "MS4": (0.03, 262.0),
}

RECORDS = {
    # name: (number of hourly samples, seed)
    "29d": (29 * 24, 20250303),
    "1y": (365 * 24, 20250304),
}


def make_record(n_samples, seed):
    t0 = C.iso_to_unix_s(START)
    t_s = t0 + 3600 * np.arange(n_samples, dtype=np.int64)
    names = list(TRUE)
    V, u, f = C.pytmd_vuf(t_s, names)
    h = np.full(n_samples, Z0_M)
    for k, name in enumerate(names):
        amp, g = TRUE[name]
        h += f[:, k] * amp * np.cos(np.radians(V[:, k] + u[:, k] - g))
    rng = np.random.default_rng(seed)
    h += rng.normal(0.0, NOISE_SIGMA_M, n_samples)
    # What is written is what everyone analyses: round to 0.1 mm first.
    h = np.round(h, 4)
    return t_s, h


def write_record(path, t_s, h):
    with path.open("w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["time_utc", "height_m"])
        for ts, hv in zip(t_s, h):
            w.writerow([C.unix_s_to_iso(ts), f"{hv:.4f}"])


def read_record(path):
    times, heights = [], []
    with path.open() as fh:
        for row in csv.DictReader(line for line in fh if not line.startswith("#")):
            times.append(np.datetime64(row["time_utc"].rstrip("Z"), "s"))
            heights.append(float(row["height_m"]))
    return np.array(times), np.array(heights)


def write_true(path, name):
    n, seed = RECORDS[name]
    with path.open("w", newline="") as fh:
        fh.write(
            f"# record_{name}.csv: {n} hourly samples from {START}; "
            f"h = Z0 + sum f H cos(V + u - G) + N(0, {NOISE_SIGMA_M} m), "
            f"numpy default_rng({seed}); V, u, f per sample from pyTMD "
            "arguments(corrections='FES'); heights rounded to 0.1 mm\n"
        )
        fh.write(C.version_line() + "\n")
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["constituent", "amplitude_m", "phase_deg"])
        w.writerow(["Z0", repr(Z0_M), "0.0"])
        for c, (amp, g) in TRUE.items():
            w.writerow([c, repr(amp), repr(g)])


def solve_utide(times, heights):
    import utide

    return utide.solve(
        times,
        heights,
        lat=LAT_DEG,
        nodal=True,
        trend=False,
        method="ols",
        conf_int="linear",
        constit="auto",
        verbose=False,
    )


def write_utide(path, name, coef):
    order = np.argsort(coef.aux.frq, kind="stable")
    names = [str(coef.name[i]) for i in order]
    with path.open("w", newline="") as fh:
        fh.write(C.version_line() + "\n")
        fh.write(
            f"# utide.solve(t, h, lat={LAT_DEG}, nodal=True, trend=False, "
            "method='ols', conf_int='linear', constit='auto') on "
            f"record_{name}.csv; t = UTC datetime64; CIs are 95 % half-widths; "
            "phases = Greenwich lags (UTC)\n"
        )
        fh.write("# constituents picked: " + " ".join(names) + "\n")
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["constituent", "amplitude_m", "phase_deg", "amp_ci_m", "phase_ci_deg"])
        w.writerow(["Z0", repr(float(coef.mean)), "0.0", "NaN", "NaN"])
        for i in order:
            w.writerow(
                [
                    str(coef.name[i]),
                    repr(float(coef.A[i])),
                    repr(float(coef.g[i])),
                    repr(float(coef.A_ci[i])),
                    repr(float(coef.g_ci[i])),
                ]
            )
    return names


def main():
    C.FIXTURE_DIR.mkdir(parents=True, exist_ok=True)
    for name, (n, seed) in RECORDS.items():
        t_s, h = make_record(n, seed)
        rec = C.FIXTURE_DIR / f"record_{name}.csv"
        write_record(rec, t_s, h)
        write_true(C.FIXTURE_DIR / f"true_{name}.csv", name)
        times, heights = read_record(rec)
        coef = solve_utide(times, heights)
        picked = write_utide(C.FIXTURE_DIR / f"utide_{name}.csv", name, coef)
        print(f"{name}: {n} samples, UTide picked {len(picked)}: {' '.join(picked)}")
        for c, (amp, g) in TRUE.items():
            if c in picked:
                i = list(coef.name).index(c)
                dg = (coef.g[i] - g + 180.0) % 360.0 - 180.0
                print(f"  {c:4s} true {amp:.3f} m {g:6.1f} deg   utide "
                      f"{coef.A[i]:.4f} m {coef.g[i]:7.2f} deg  (dA {coef.A[i]-amp:+.4f} m, dG {dg:+.2f} deg)")


if __name__ == "__main__":
    main()
