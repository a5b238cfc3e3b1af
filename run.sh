#!/usr/bin/env bash
# One entry point for a fresh machine:
#   ./run.sh serve [--host H] [--port P] [--workers N]   run the service and its demo page
#   ./run.sh test [pytest args]                          run the whole test suite
#   ./run.sh bench                                       print every benchmark table
#   ./run.sh lint                                        style and type gate (ruff, mypy)
# The first call creates .venv and installs the package with its test extras.
set -euo pipefail
cd "$(dirname "$0")"
venv=.venv
stamp="$venv/.installed-$(sha1sum pyproject.toml | cut -c1-12)"
if [ ! -f "$stamp" ]; then
    python3 -m venv "$venv"
    "$venv/bin/python" -m pip install -q --upgrade pip
    "$venv/bin/python" -m pip install -q -e ".[test]"
    "$venv/bin/python" -m estimators.warmup
    touch "$stamp"
fi
cmd="${1:-serve}"
shift || true
case "$cmd" in
    serve) exec "$venv/bin/bandwise" serve "$@" ;;
    test)  exec "$venv/bin/python" -m pytest "$@" ;;
    bench) exec "$venv/bin/python" -m tests.bench "$@" ;;
    lint)  "$venv/bin/ruff" check . && exec "$venv/bin/mypy" ;;
    *) echo "usage: ./run.sh serve|test|bench|lint [args]" >&2; exit 2 ;;
esac
