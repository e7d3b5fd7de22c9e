#!/usr/bin/env bash
# Install every dependency at the lowest version pyproject.toml allows (its ">=" bounds) into
# .venv-oldest/ and run the tests there, so the stated lower bounds are versions the tests pass with.
# The newest versions are what scripts/test.sh (and CI, in a fresh .venv/) installs.
set -euo pipefail
cd "$(dirname "$0")/.."
[ -x .venv-oldest/bin/python ] || python3 -m venv .venv-oldest
.venv-oldest/bin/python -m pip install -q --upgrade pip packaging
# "name[extra]>=X; marker" -> "name==X" for the running interpreter.
.venv-oldest/bin/python - > .venv-oldest/constraints.txt <<'PY'
import re, sys, tomllib
from packaging.markers import Marker
doc = tomllib.load(open("pyproject.toml", "rb"))["project"]
reqs = doc["dependencies"] + doc["optional-dependencies"]["test"]
for req in reqs:
    spec, _, marker = req.partition(";")
    if marker.strip() and not Marker(marker.strip()).evaluate():
        continue
    m = re.match(r"\s*([A-Za-z0-9_.-]+)(\[[^\]]*\])?\s*>=\s*([^,\s]+)", spec)
    if m:
        print(f"{m.group(1)}=={m.group(3)}")
PY
cat .venv-oldest/constraints.txt
.venv-oldest/bin/python -m pip install -q -c .venv-oldest/constraints.txt -e ".[test]"
.venv-oldest/bin/python -m pip list --format=freeze | grep -iE "^($(cut -d= -f1 .venv-oldest/constraints.txt | paste -sd'|'))=" || true
.venv-oldest/bin/python -m pytest -m "not browser" -q "$@"
