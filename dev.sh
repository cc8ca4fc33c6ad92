#!/usr/bin/env bash
# One entry point for people and CI.
#   ./dev.sh demo   set up a virtual environment, install sqlgen, run `sqlgen demo`
#   ./dev.sh test   set up everything the tests need (engines included) and run the whole suite
set -euo pipefail
cd "$(dirname "$0")"
VENV="${SQLGEN_VENV:-.venv}"

ensure_venv() {
  if [ ! -x "$VENV/bin/python" ]; then
    python3 -m venv "$VENV"
  fi
  "$VENV/bin/python" -m pip install -q --upgrade pip >/dev/null
}

case "${1:-}" in
  demo)
    ensure_venv
    "$VENV/bin/python" -m pip install -q '.[report]'
    shift
    exec "$VENV/bin/sqlgen" demo "$@"
    ;;
  test)
    ensure_venv
    bash .ci/setup_engines.sh
    "$VENV/bin/python" -m pip install -q -e '.[test,bench,report]'
    # Only the CDNOW data file of this package is used; its own dependencies are not needed.
    "$VENV/bin/python" -m pip install -q --no-deps 'lifetimes==0.11.3'
    shift
    exec "$VENV/bin/python" -m pytest -n 2 --dist loadgroup "$@"
    ;;
  *)
    echo "usage: ./dev.sh demo | ./dev.sh test [pytest arguments]" >&2
    exit 2
    ;;
esac
