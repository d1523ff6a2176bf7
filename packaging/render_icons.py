#!/usr/bin/env python3
"""Render the OrbitDesk icon (resources/icon.svg) to PNGs at the standard sizes.

Outputs:
  resources/icons/orbitdesk-<N>.png      for N in SIZES
  orbitdesk/resources/icon.svg           (package data, copied verbatim)
  orbitdesk/resources/icon-256.png       (package data)

Rendering uses PySide6's QtSvg when it is importable (run headless with
QT_QPA_PLATFORM=offscreen, which this script sets if unset) and falls back to
ImageMagick's ``convert``. Usage, from the repository root or anywhere:

    .venv/bin/python packaging/render_icons.py [--backend qt|convert]
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SVG = ROOT / "resources" / "icon.svg"
ICON_DIR = ROOT / "resources" / "icons"
PACKAGE_RES = ROOT / "orbitdesk" / "resources"
SIZES = (16, 32, 48, 64, 128, 256, 512)


def png_path(size: int) -> Path:
    return ICON_DIR / f"orbitdesk-{size}.png"


def render_qt(svg: Path, sizes) -> None:
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtCore import Qt
    from PySide6.QtGui import QGuiApplication, QImage, QPainter
    from PySide6.QtSvg import QSvgRenderer

    app = QGuiApplication.instance() or QGuiApplication([])  # noqa: F841 (keeps Qt alive)
    renderer = QSvgRenderer(str(svg))
    if not renderer.isValid():
        raise RuntimeError(f"QtSvg could not parse {svg}")
    for size in sizes:
        image = QImage(size, size, QImage.Format.Format_ARGB32_Premultiplied)
        image.fill(Qt.GlobalColor.transparent)
        painter = QPainter(image)
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        painter.setRenderHint(QPainter.RenderHint.SmoothPixmapTransform)
        renderer.render(painter)
        painter.end()
        out = png_path(size)
        if not image.save(str(out), "PNG"):
            raise RuntimeError(f"could not write {out}")


def render_convert(svg: Path, sizes) -> None:
    exe = shutil.which("convert")
    if exe is None:
        raise RuntimeError("ImageMagick 'convert' not found on PATH")
    for size in sizes:
        # Rasterise at a density that lands exactly on the target size, keep alpha.
        density = max(1, round(72 * size / 512))
        subprocess.run(
            [exe, "-background", "none", "-density", str(density), str(svg),
             "-resize", f"{size}x{size}!", f"PNG32:{png_path(size)}"],
            check=True,
        )


def qt_available() -> bool:
    try:
        import PySide6.QtSvg  # noqa: F401
    except ImportError:
        return False
    return True


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--backend", choices=("auto", "qt", "convert"), default="auto")
    args = parser.parse_args(argv)

    ICON_DIR.mkdir(parents=True, exist_ok=True)
    PACKAGE_RES.mkdir(parents=True, exist_ok=True)

    backend = args.backend
    if backend == "auto":
        backend = "qt" if qt_available() else "convert"
    (render_qt if backend == "qt" else render_convert)(SVG, SIZES)

    shutil.copyfile(SVG, PACKAGE_RES / "icon.svg")
    shutil.copyfile(png_path(256), PACKAGE_RES / "icon-256.png")

    for size in SIZES:
        print(f"{png_path(size).relative_to(ROOT)}  ({backend})")
    print(f"{(PACKAGE_RES / 'icon.svg').relative_to(ROOT)}")
    print(f"{(PACKAGE_RES / 'icon-256.png').relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
