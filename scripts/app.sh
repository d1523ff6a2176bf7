#!/usr/bin/env bash
# Opens OrbitDesk on a sample project (or on the file given). With no screen, says how to get one.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bash "$here/scripts/bootstrap.sh"
target="${1:-$here/orbitdesk/samples/convection_loop.orbitdesk}"
if [ -z "${DISPLAY:-}" ] && [ -z "${WAYLAND_DISPLAY:-}" ]; then
  echo "orbitdesk: no screen found (DISPLAY is not set)." >&2
  echo "  On a desktop, run this from a terminal inside your session." >&2
  echo "  On a headless machine: xvfb-run -a bash scripts/app.sh   (then take screenshots), or use the command line:" >&2
  echo "  .venv/bin/orbitdesk --help" >&2
  exit 3
fi
if [ -f "$target" ]; then
  exec "$here/.venv/bin/orbitdesk" open "$target"
fi
exec "$here/.venv/bin/orbitdesk"
