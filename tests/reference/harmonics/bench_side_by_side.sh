#!/usr/bin/env bash
# Side-by-side timing of `ebbwise analyse` and a Python script that reads the same record and calls
# `utide.solve` (bench_utide.py): whole processes, wall clock, on the same machine, alternating.
#
#     cargo build --release --bin ebbwise
#     bash tests/reference/harmonics/bench_side_by_side.sh            # 7 runs of each side
#     bash tests/reference/harmonics/bench_side_by_side.sh 11         # 11 runs of each side
#
# Needs the reference virtual environment with UTide (see README.md here; made by make_all.sh)
# at $EBBWISE_REF_VENV (default /work/venv-ref), and the ebbwise binary at $EBBWISE_BIN (default
# target/release/ebbwise). Stops with a message when either is missing; it builds and installs
# nothing itself.
#
# The record is tests/fixtures/harmonics/record_1y.csv (8760 hourly heights, one year).
# Each round runs, in this order:
#   ebbwise       ebbwise analyse RECORD --time-column time_utc --height-column height_m --out TMP
#              (ebbwise's defaults: QC on, constituents by the Rayleigh criterion at factor 1 —
#              43 for this record — nodal corrections per sample);
#   ebbwise-58    the same with --constituents and the 58 table constituents this record separates
#              at Rayleigh factor 1 (as in benches/harmonics.rs; UTide's automatic choice is 59);
#   utide      $EBBWISE_REF_VENV/bin/python bench_utide.py RECORD: Python start-up, imports (numpy,
#              utide), reading the CSV, utide.solve(nodal=True, trend=False, method='ols',
#              conf_int='linear', constit='auto'); it prints its own import/read/solve split.
# One untimed warm-up run of each side comes first (page cache, Python byte-code cache).
# Wall time is taken by bash ($EPOCHREALTIME) around each command, so both sides carry the same
# fork/exec cost. Prints every run, the medians and the ratios utide / ebbwise. Run it on an
# otherwise idle machine: the load average is printed before and after.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
repo="$(cd "$here/../../.." && pwd)"
runs="${1:-7}"
venv="${EBBWISE_REF_VENV:-/work/venv-ref}"
ebbwise="${EBBWISE_BIN:-$repo/target/release/ebbwise}"
record="$repo/tests/fixtures/harmonics/record_1y.csv"
python="$venv/bin/python"
list="SSA,MSM,MM,MSF,MF,2Q1,SIGMA1,Q1,RHO1,O1,TAU1,M1,CHI1,P1,K1,PHI1,THETA1,J1,SO1,OO1,OQ2,EPS2,2N2,MU2,N2,NU2,M2,MKS2,LAMBDA2,L2,S2,K2,MSN2,ETA2,2SM2,MO3,M3,SO3,MK3,SK3,MN4,M4,SN4,MS4,MK4,S4,SK4,2MO5,2MK5,2SK5,2MN6,M6,2MS6,2MK6,2SM6,MSK6,3MK7,M8"

die() {
    echo "bench_side_by_side: $*" >&2
    exit 2
}
[[ "$runs" =~ ^[1-9][0-9]*$ ]] || die "RUNS must be a positive whole number, found '$runs'"
[ -x "$ebbwise" ] || die "no ebbwise binary at $ebbwise: build it with 'cargo build --release --bin ebbwise' (or set EBBWISE_BIN)"
[ -x "$python" ] || die "no Python at $python: make the reference environment with 'bash tests/reference/harmonics/make_all.sh' (or set EBBWISE_REF_VENV)"
"$python" -c "import utide, numpy" 2>/dev/null ||
    die "$python cannot import utide and numpy: install tests/reference/harmonics/requirements.txt into $venv"
[ -f "$record" ] || die "no record at $record"

tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT

# Runs one side once; prints its wall time in seconds (6 decimals) and keeps its output.
run_side() {
    local side="$1" start end
    start="$EPOCHREALTIME"
    case "$side" in
    ebbwise)
        "$ebbwise" analyse "$record" --time-column time_utc --height-column height_m \
            --out "$tmp/ebbwise.toml" >"$tmp/$side.out" 2>&1 || { cat "$tmp/$side.out" >&2; die "ebbwise analyse failed"; }
        ;;
    ebbwise-58)
        "$ebbwise" analyse "$record" --time-column time_utc --height-column height_m \
            --constituents "$list" --out "$tmp/ebbwise58.toml" >"$tmp/$side.out" 2>&1 ||
            { cat "$tmp/$side.out" >&2; die "ebbwise analyse --constituents failed"; }
        ;;
    utide)
        "$python" "$here/bench_utide.py" "$record" >"$tmp/$side.out" 2>&1 ||
            { cat "$tmp/$side.out" >&2; die "bench_utide.py failed"; }
        ;;
    esac
    end="$EPOCHREALTIME"
    awk -v a="$start" -v b="$end" 'BEGIN { printf "%.6f", b - a }'
}

median() { sort -g | awk '{ v[NR] = $1 } END { if (NR % 2) print v[(NR + 1) / 2]; else print (v[NR / 2] + v[NR / 2 + 1]) / 2 }'; }

sides=(ebbwise ebbwise-58 utide)
echo "ebbwise analyse vs UTide (utide.solve) on record_1y.csv: $runs alternating runs of each side"
echo "  machine  $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//') | $(nproc) logical CPUs | load average $(cut -d' ' -f1-3 /proc/loadavg)"
echo "  ebbwise     $ebbwise ($("$ebbwise" --version 2>/dev/null || echo '?'))"
echo "  python   $python ($("$python" -c 'import sys, utide, numpy; print("Python", sys.version.split()[0], "utide", utide.__version__, "numpy", numpy.__version__)'))"
for s in "${sides[@]}"; do run_side "$s" >/dev/null; done # warm-up
for ((i = 1; i <= runs; i++)); do
    line="  run $(printf '%2d' "$i")"
    for s in "${sides[@]}"; do
        t="$(run_side "$s")"
        echo "$t" >>"$tmp/$s.times"
        line+="  $s $(printf '%8.3f' "$t") s"
    done
    echo "$line   (utide: $(cat "$tmp/utide.out"))"
done
grep -m1 'constituents fitted' "$tmp/ebbwise.out" | sed 's/^ */  ebbwise:    /'
grep -m1 'constituents fitted' "$tmp/ebbwise-58.out" | sed 's/^ */  ebbwise-58: /'
m_ebbwise="$(median <"$tmp/ebbwise.times")"
m_ebbwise58="$(median <"$tmp/ebbwise-58.times")"
m_utide="$(median <"$tmp/utide.times")"
echo "  medians: ebbwise $(printf '%.3f' "$m_ebbwise") s, ebbwise-58 $(printf '%.3f' "$m_ebbwise58") s, utide $(printf '%.3f' "$m_utide") s"
awk -v n="$m_ebbwise" -v n58="$m_ebbwise58" -v u="$m_utide" 'BEGIN {
    printf "  ratio utide / ebbwise    = %.1f (target at least 20: %s)\n", u / n, (u / n >= 20 ? "met" : "NOT met")
    printf "  ratio utide / ebbwise-58 = %.1f\n", u / n58
}'
echo "  load average after $(cut -d' ' -f1-3 /proc/loadavg)"
