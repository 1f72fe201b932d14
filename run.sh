#!/usr/bin/env bash
# Set up and run Sparkward on a Debian machine (as root, or with sudo available).
#   ./run.sh demo [--host H] [--port P]   fresh demo station on SQLite, prints the URL and log-ins
#   ./run.sh test [pytest args]           the whole test suite, browser tests included
set -euo pipefail
cd "$(dirname "$0")"

VENV=${SPARKWARD_VENV:-.venv}
SUDO=""
[ "$(id -u)" -eq 0 ] || SUDO="sudo"

apt_install() {
  local missing=()
  for pkg in "$@"; do
    dpkg-query -W -f='${Status}' "$pkg" 2>/dev/null | grep -q "install ok installed" || missing+=("$pkg")
  done
  if ((${#missing[@]})); then
    echo "Installing Debian packages: ${missing[*]}"
    $SUDO apt-get update -qq
    DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq "${missing[@]}" >/dev/null
  fi
}

python_env() {
  # WeasyPrint's text stack and the fonts the pages and records name.
  apt_install libpango-1.0-0 libpangoft2-1.0-0 fonts-dejavu-core
  if ! command -v python3 >/dev/null || ! python3 -c 'import venv, ensurepip' 2>/dev/null; then
    apt_install python3 python3-venv python3-pip
  fi
  python3 -c 'import sys; sys.exit(sys.version_info < (3, 11))' || {
    echo "Sparkward needs Python 3.11 or newer (found $(python3 --version))" >&2; exit 1; }
  [ -x "$VENV/bin/python" ] || python3 -m venv "$VENV"
  # (pip's "Location ... is ignored" lines come from this machine's pip config: harmless)
  "$VENV/bin/python" -m pip install -q --upgrade pip 2>&1 | { grep -v "is ignored" || true; }
  "$VENV/bin/python" -m pip install -q -e ".[test]" 2>&1 | { grep -v "is ignored" || true; }
  "$VENV/bin/python" -c 'import webapp, flask, sqlite_utils, playwright' >/dev/null
}

case "${1:-}" in
  demo)
    shift
    python_env
    exec "$VENV/bin/sparkward" demo --db instance/demo.db "$@"
    ;;
  test)
    shift
    # pdftoppm (poppler-utils): the sign-off browser test renders the record to PNG;
    # pdfsig (poppler-utils) with an NSS trust store (certutil, libnss3-tools) checks the
    # signatures with a validator that is not ours.
    apt_install chromium poppler-utils libnss3-tools
    python_env
    export CHROMIUM_PATH=${CHROMIUM_PATH:-/usr/bin/chromium}
    "$VENV/bin/sparkward" tasks check
    # One test process per core (the signed-record tests are CPU-bound); a test file stays
    # on one worker, so its module fixtures and its live server are built once.
    exec "$VENV/bin/python" -m pytest -n auto --dist loadfile "$@"
    ;;
  *)
    echo "usage: ./run.sh demo [--host H] [--port P] | ./run.sh test [pytest args]" >&2
    exit 2
    ;;
esac
