#!/usr/bin/env bash
# Shared set-up for scripts/app.sh and scripts/test.sh: system libraries Qt needs, a virtual
# environment in .venv, and the package installed into it. Safe to run again; it skips what is there.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$here"

need_apt=()
command -v Xvfb >/dev/null 2>&1 || need_apt+=(xvfb xauth)
# read the library cache once: 'ldconfig -p | grep -q' under pipefail fails when grep stops reading early
known_libs="$(ldconfig -p 2>/dev/null || true)"
for lib in libxkbcommon-x11.so.0 libxcb-cursor.so.0 libxcb-icccm.so.4 libxcb-keysyms.so.1 \
           libxcb-shape.so.0 libxcb-randr.so.0 libxcb-render-util.so.0 libxcb-xinerama.so.0 \
           libxcb-image.so.0 libEGL.so.1 libGL.so.1 libfontconfig.so.1 libdbus-1.so.3; do
  if ! grep -qF "$lib" <<< "$known_libs"; then need_apt+=(needs-libs); break; fi
done
if [ ${#need_apt[@]} -gt 0 ]; then
  if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
    echo "orbitdesk: installing the system libraries Qt needs (apt-get)..." >&2
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq >/dev/null
    apt-get install -y -qq xvfb xauth libxkbcommon-x11-0 libxkbcommon0 libxcb-cursor0 libxcb-icccm4 \
      libxcb-keysyms1 libxcb-shape0 libxcb-randr0 libxcb-render-util0 libxcb-xinerama0 libxcb-image0 \
      libegl1 libgl1 libfontconfig1 libdbus-1-3 >/dev/null
  else
    echo "orbitdesk: missing system packages (xvfb and the xcb/GL libraries); install them with:" >&2
    echo "  sudo apt-get install xvfb xauth libxkbcommon-x11-0 libxcb-cursor0 libxcb-icccm4 libxcb-keysyms1 libxcb-shape0 libxcb-randr0 libxcb-render-util0 libxcb-xinerama0 libxcb-image0 libegl1 libgl1" >&2
  fi
fi

py=${PYTHON:-python3}
if [ ! -x .venv/bin/python ]; then
  "$py" -m venv .venv
fi
# The tests also cover the optional extras: Dask for cluster runs (numba is a regular dependency).
extras="test,cluster,jit"
stamp=.venv/.orbitdesk-installed-${extras//,/-}
if [ ! -f "$stamp" ] || [ pyproject.toml -nt "$stamp" ]; then
  .venv/bin/python -m pip install -q --upgrade pip >/dev/null
  echo "orbitdesk: installing the package and its dependencies into .venv ..." >&2
  if ! .venv/bin/python -m pip install -q -e ".[$extras]" > .venv/install.log 2>&1; then
    cat .venv/install.log >&2
    exit 1
  fi
  touch "$stamp"
fi
