#!/usr/bin/env bash
# Runs the whole test suite on a virtual X server (so the OpenGL views are exercised).
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bash "$here/scripts/bootstrap.sh"
cd "$here"
export QT_QPA_PLATFORM=xcb
exec .venv/bin/python -m pytest -q -p xvfb "$@"
