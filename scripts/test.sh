#!/usr/bin/env bash
# The README's second command: make (or reuse) the virtualenv .venv/ inside the checkout, install the
# project and its test dependencies into it with pip, then run the tests with it. The system Python's
# packages are never touched, so this works on a stock Debian/Ubuntu Python (PEP 668) as anywhere.
# Debian packages come from apt: python3-venv (when `python3 -m venv` cannot make a venv), chromium for
# the browser tests (never a Playwright browser download), and libjpeg-turbo-progs for cjpeg.
set -euo pipefail
cd "$(dirname "$0")/.."

apt_install() {
  local sudo=""
  [ "$(id -u)" = 0 ] || sudo="sudo"
  $sudo apt-get update -qq
  $sudo env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "$@" >/dev/null
}

need=()
command -v chromium >/dev/null 2>&1 || need+=(chromium)
command -v cjpeg >/dev/null 2>&1 || need+=(libjpeg-turbo-progs)
if [ ! -x .venv/bin/python ] && ! python3 -c 'import ensurepip, venv' >/dev/null 2>&1; then
  need+=(python3-venv)
fi
[ ${#need[@]} -eq 0 ] || apt_install "${need[@]}"

[ -x .venv/bin/python ] || python3 -m venv .venv
.venv/bin/python -m pip install -q --upgrade pip
.venv/bin/python -m pip install -q -e ".[test]"

set +e
.venv/bin/python -m pytest "$@"
rc=$?
set -e
# pytest exits 5 when it collected no test: that must fail, never pass silently.
if [ "$rc" = 5 ]; then
  echo "pytest collected no tests: failing on purpose" >&2
  exit 1
fi
exit "$rc"
