"""Shared helpers of the command line tests: model files in a temp dir and a captured run of ``main``."""

import pytest

from orbitdesk.cli import main


@pytest.fixture
def model(tmp_path):
    """``model(text, name="model.txt")`` writes a model file and returns its path."""
    def write(text, name="model.txt"):
        path = tmp_path / name
        path.write_text(text)
        return path

    return write


def run_cli(capsys, *args):
    """Run the command line with ``args``; returns (exit code, stdout, stderr)."""
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err
