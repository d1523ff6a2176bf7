"""The sample projects, shipped inside the package (package data): ``.orbitdesk`` files in scenarios of
our own, each with a walkthrough, and the invented measured records in ``data/`` that two of them fit.

Help > Sample Projects lists ``sample_paths()``; they are written by scripts/make_samples.py.
"""

from __future__ import annotations

from pathlib import Path

SAMPLES_DIR = Path(__file__).resolve().parent
SAMPLE_SUFFIX = ".orbitdesk"


def sample_paths(directory: Path | None = None) -> list[Path]:
    """The sample project files (sorted by name); none when the folder cannot be read."""
    directory = SAMPLES_DIR if directory is None else Path(directory)
    try:
        return sorted(p for p in directory.iterdir() if p.suffix == SAMPLE_SUFFIX and p.is_file())
    except OSError:
        return []


def sample_path(name: str) -> Path:
    """The file of the sample called ``name`` ("convection_loop")."""
    return SAMPLES_DIR / f"{name}{SAMPLE_SUFFIX}"
