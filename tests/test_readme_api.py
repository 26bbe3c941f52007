"""The README's Python API example runs as printed."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

README = Path(__file__).resolve().parents[1] / "README.md"


def _example() -> str:
    text = README.read_text(encoding="utf-8")
    section = text.split("## Python API", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```python\n(.*?)```", section, flags=re.S)
    assert len(blocks) == 1, "the Python API section has one example"
    return blocks[0]


def test_readme_python_example_runs(tmp_path):
    script = tmp_path / "example.py"
    script.write_text(_example(), encoding="utf-8")
    # a fresh interpreter, outside the repository: only the installed package is importable
    done = subprocess.run([sys.executable, "-I", str(script)], cwd=tmp_path, capture_output=True,
                          text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    out = done.stdout
    assert "certified" in out and "scenarios" in out and "joint-whole" in out
