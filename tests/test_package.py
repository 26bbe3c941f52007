"""The installed distribution: one import name, a version, a light start-up, a public API."""

from __future__ import annotations

import subprocess
import sys
from importlib import metadata

import pytest

import basiswise


def _python(code: str, cwd) -> subprocess.CompletedProcess:
    """Run ``code`` in a fresh isolated interpreter (no cwd or PYTHONPATH on sys.path)."""
    return subprocess.run([sys.executable, "-I", "-c", code], cwd=cwd, capture_output=True,
                          text=True, timeout=120)


@pytest.mark.parametrize("name", ["optimizer", "data_adapters", "scenarios", "api"])
def test_folder_names_are_not_import_names(name, tmp_path):
    done = _python(f"import {name}", tmp_path)
    assert done.returncode != 0
    assert f"No module named '{name}'" in done.stderr


def test_subpackages_import_under_basiswise(tmp_path):
    done = _python("import basiswise.optimizer.solvers.exact, basiswise.data_adapters.book, "
                   "basiswise.scenarios; print(basiswise.scenarios.demo_book_path().is_file())",
                   tmp_path)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "True"


def test_version_is_the_distribution_version():
    assert basiswise.__version__ == metadata.version("basiswise")
    assert basiswise.__version__[0].isdigit()


def test_import_and_command_line_start_stay_light(tmp_path):
    # `basiswise --help` loads the package and the typer app, nothing that computes
    done = _python("import sys, basiswise, basiswise.cli.app, basiswise.data_adapters; "
                   "print(sorted(m for m in ('pandas', 'pint', 'cvxpy', 'sklearn', 'scipy') "
                   "if m in sys.modules))", tmp_path)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "[]"


def test_python_dash_m_runs_the_command_line(tmp_path):
    done = subprocess.run([sys.executable, "-I", "-m", "basiswise", "--help"], cwd=tmp_path,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert "solve" in done.stdout and "backtest" in done.stdout


def test_every_public_name_resolves():
    for name in basiswise.__all__:
        assert getattr(basiswise, name) is not None, name
    assert set(basiswise.__all__) <= set(dir(basiswise))
    with pytest.raises(AttributeError, match="no attribute 'nonsense'"):
        basiswise.nonsense  # noqa: B018
