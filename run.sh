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
# One step of the first-run set-up: a line on screen, the step's own output in
# $venv/install.log, shown only when the step fails.
step() {
    local what=$1 started=$SECONDS
    shift
    printf '%s ... ' "$what"
    if "$@" >>"$venv/install.log" 2>&1; then
        echo "done ($((SECONDS - started)) s)"
    else
        echo "failed; its output (also in $venv/install.log):"
        tail -n 40 "$venv/install.log" >&2
        exit 1
    fi
}
if [ ! -f "$stamp" ]; then
    echo "first run: setting up $venv (later runs start at once)"
    python3 -m venv "$venv"
    : >"$venv/install.log"
    step "upgrading pip" "$venv/bin/python" -m pip install --upgrade pip
    step "installing bandwise and its dependencies" "$venv/bin/python" -m pip install -e ".[test]"
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
