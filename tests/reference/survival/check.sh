#!/usr/bin/env bash
# Re-creates the survival reference fixtures with R and compares them with the committed ones.
#
# Usage (from the repository root): bash tests/reference/survival/check.sh
#   --write   replace the committed fixtures with freshly generated ones (after a deliberate change
#             to a script; review the diff before committing).
# Installs R, survival, jsonlite and cmprsk from Debian if they are missing (needs root and apt).
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
fixtures="$here/fixtures"
scripts=(kaplan_meier.R log_rank.R cox.R aalen_johansen.R)

if ! Rscript -e 'suppressPackageStartupMessages({library(survival); library(jsonlite); library(cmprsk)})' >/dev/null 2>&1; then
  echo "check.sh: installing r-base-core r-cran-survival r-cran-jsonlite r-cran-cmprsk (apt-get)" >&2
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq >/dev/null
  apt-get install -y -qq r-base-core r-cran-survival r-cran-jsonlite r-cran-cmprsk >/dev/null
fi

out="$(mktemp -d)"
trap 'rm -rf "$out"' EXIT
for script in "${scripts[@]}"; do
  Rscript "$here/$script" "$out"
done

if [[ "${1:-}" == "--write" ]]; then
  mkdir -p "$fixtures"
  cp "$out"/* "$fixtures"/
  echo "check.sh: wrote $(ls "$out" | wc -l) fixtures to $fixtures" >&2
  exit 0
fi

status=0
for file in "$out"/*; do
  name="$(basename "$file")"
  if [[ ! -f "$fixtures/$name" ]]; then
    echo "check.sh: fixture $name is produced by the scripts but not committed" >&2
    status=1
  elif ! cmp -s "$file" "$fixtures/$name"; then
    echo "check.sh: fixture $name differs from what the scripts produce now:" >&2
    diff -u "$fixtures/$name" "$file" | head -20 >&2 || true
    status=1
  fi
done
for file in "$fixtures"/*; do
  name="$(basename "$file")"
  if [[ ! -f "$out/$name" ]]; then
    echo "check.sh: committed fixture $name is not produced by any script" >&2
    status=1
  fi
done
if [[ $status -ne 0 ]]; then
  echo "check.sh: FAILED: the fixtures are not what the R scripts produce; never edit them by hand," >&2
  echo "hint: if a script changed on purpose, run 'bash tests/reference/survival/check.sh --write' and review the diff" >&2
  exit 1
fi
echo "check.sh: all $(ls "$out" | wc -l) survival fixtures match ($(Rscript -e 'cat(R.version.string, "; survival", as.character(packageVersion("survival")), "; cmprsk", as.character(packageVersion("cmprsk")))'))"
