#!/usr/bin/env bash
# Regenerate the rate/proportion/ratio reference fixtures with pinned library versions and fail if
# any differs from the committed file, so that a fixture can never be edited by hand.
#
# Run from the repository root:   bash tests/reference/rates/check.sh
# Needs python3 (3.11 was used) with venv, and PyPI access for the first run. The virtual
# environment is kept in $KCOHORT_REFERENCE_VENV (default: a versioned folder under $TMPDIR or /tmp)
# so that later runs do not download again.
set -euo pipefail

NUMPY_VERSION=2.4.6
SCIPY_VERSION=1.17.1
STATSMODELS_VERSION=0.15.0

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
python="${PYTHON:-python3}"
venv="${KCOHORT_REFERENCE_VENV:-${TMPDIR:-/tmp}/kcohort-reference-rates-numpy${NUMPY_VERSION}-scipy${SCIPY_VERSION}-statsmodels${STATSMODELS_VERSION}}"

if [ ! -x "$venv/bin/python" ]; then
    "$python" -m venv "$venv"
fi
export PIP_DISABLE_PIP_VERSION_CHECK=1
"$venv/bin/pip" install -q "numpy==${NUMPY_VERSION}" "scipy==${SCIPY_VERSION}" "statsmodels==${STATSMODELS_VERSION}"

fresh="$(mktemp -d)"
trap 'rm -rf "$fresh"' EXIT
"$venv/bin/python" "$here/make_fixtures.py" "$fresh"

status=0
for committed in "$here"/fixtures/*.json; do
    name="$(basename "$committed")"
    if [ ! -e "$fresh/$name" ]; then
        echo "error: tests/reference/rates/fixtures/$name is committed but make_fixtures.py no longer writes it" >&2
        status=1
    elif ! cmp -s "$committed" "$fresh/$name"; then
        echo "error: tests/reference/rates/fixtures/$name differs from what make_fixtures.py writes with numpy ${NUMPY_VERSION}, scipy ${SCIPY_VERSION}, statsmodels ${STATSMODELS_VERSION}:" >&2
        diff -u "$committed" "$fresh/$name" | head -n 40 >&2 || true
        status=1
    fi
done
for made in "$fresh"/*.json; do
    name="$(basename "$made")"
    if [ ! -e "$here/fixtures/$name" ]; then
        echo "error: make_fixtures.py writes $name, which is not committed under tests/reference/rates/fixtures/" >&2
        status=1
    fi
done

if [ "$status" -ne 0 ]; then
    echo "hint: change make_fixtures.py (never the JSON), run 'python3 tests/reference/rates/make_fixtures.py' in the pinned environment, and review the diff" >&2
    exit 1
fi
echo "ok: all $(ls "$here"/fixtures/*.json | wc -l) rate reference fixtures match make_fixtures.py (numpy ${NUMPY_VERSION}, scipy ${SCIPY_VERSION}, statsmodels ${STATSMODELS_VERSION})"
