#!/usr/bin/env bash
# Regenerate every harmonic-analysis reference fixture under tests/fixtures/harmonics/.
#
#     bash tests/reference/harmonics/make_all.sh
#
# Uses the virtual environment at $EBBWISE_REF_VENV (default /work/venv-ref), creating it
# and installing the pinned libraries of requirements.txt if it is missing. Needs python3
# with the venv module and access to PyPI the first time.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
venv="${EBBWISE_REF_VENV:-/work/venv-ref}"
if [ ! -x "$venv/bin/python" ]; then
    python3 -m venv "$venv"
    "$venv/bin/pip" install --quiet --upgrade pip
    "$venv/bin/pip" install --quiet -r "$here/requirements.txt"
fi
"$venv/bin/python" "$here/make_astro_fixture.py"
"$venv/bin/python" "$here/make_utide_fixture.py"
