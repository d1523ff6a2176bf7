#!/usr/bin/env bash
# Runs the whole test suite on a virtual X server (so the OpenGL views are exercised), then the
# tests marked 'fallback' with the compiler turned off; with arguments, just pytest with them.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bash "$here/scripts/bootstrap.sh"
cd "$here"
export QT_QPA_PLATFORM=xcb
if [ $# -gt 0 ]; then
  exec .venv/bin/python -m pytest -q -p xvfb "$@"
fi
# the whole suite, then the published-value checks again with the compiler turned off (plain Python)
.venv/bin/python -m pytest -q -p xvfb
ORBITDESK_NO_JIT=1 exec .venv/bin/python -m pytest -q -p xvfb -m fallback tests/core
