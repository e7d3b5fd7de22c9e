#!/usr/bin/env bash
# The README's second command: install everything the tests need, then run them.
# Chromium comes from Debian (never a Playwright browser download).
set -euo pipefail
cd "$(dirname "$0")/.."
if ! command -v chromium >/dev/null 2>&1; then
  if [ "$(id -u)" = 0 ]; then
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null
  else
    sudo apt-get update -qq && sudo DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null
  fi
fi
python3 -m pip install -q -e ".[test]"
set +e
python3 -m pytest "$@"
rc=$?
set -e
# pytest exits 5 when it collected no test: that must fail, never pass silently.
if [ "$rc" = 5 ]; then
  echo "pytest collected no tests: failing on purpose" >&2
  exit 1
fi
exit "$rc"
