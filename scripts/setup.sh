#!/usr/bin/env bash
# Set up stockbias in ./.venv on a Debian 12+ machine with Python 3.11+.
#   bash scripts/setup.sh          the tool itself
#   bash scripts/setup.sh --test   the tool, the test and cluster extras (Dask's distributed) and the system packages tests use (ngspice, chromium)
# System packages are installed with apt-get only where missing (as root, or through sudo).
set -euo pipefail
cd "$(dirname "$0")/.."

want_tests=0
[ "${1:-}" = "--test" ] && want_tests=1

SUDO=""
if [ "$(id -u)" -ne 0 ]; then
  SUDO="sudo"
fi
apt_updated=0
apt_install() {
  if [ "$apt_updated" -eq 0 ]; then
    $SUDO apt-get update -qq
    apt_updated=1
  fi
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq "$@" >/dev/null
}

PY=${PYTHON:-python3}
if ! "$PY" -c 'import sys; sys.exit(0 if sys.version_info >= (3, 11) else 1)'; then
  echo "stockbias needs Python 3.11 or newer; $("$PY" --version 2>&1) found" >&2
  exit 1
fi
if ! "$PY" -c 'import ensurepip, venv' >/dev/null 2>&1; then
  echo "installing python3-venv (apt-get)" >&2
  apt_install python3-venv
fi
if [ "$want_tests" -eq 1 ] && ! command -v ngspice >/dev/null 2>&1; then
  echo "installing ngspice, the reference simulator the tests compare against (apt-get)" >&2
  apt_install ngspice
fi
if [ "$want_tests" -eq 1 ] && ! command -v chromium >/dev/null 2>&1; then
  echo "installing chromium, the headless browser the HTML report test renders with (apt-get)" >&2
  apt_install chromium
fi

if [ ! -x .venv/bin/python ]; then
  "$PY" -m venv .venv
fi
.venv/bin/python -m pip install -q --upgrade pip >/dev/null 2>&1 || true
target='.'
[ "$want_tests" -eq 1 ] && target='.[test,cluster]'
echo "installing stockbias and its Python packages into .venv (log: .venv/pip.log)" >&2
if ! .venv/bin/python -m pip install --disable-pip-version-check -e "$target" \
    > .venv/pip.log 2>&1; then
  cat .venv/pip.log >&2
  echo "pip install failed (log above, also in .venv/pip.log)" >&2
  exit 1
fi
echo "stockbias is set up in .venv ($(.venv/bin/python --version))" >&2
