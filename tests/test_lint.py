"""Lint runs with the tests: ruff over the whole tree."""

import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_ruff_finds_nothing():
    ruff = shutil.which("ruff") or str(Path(sys.executable).parent / "ruff")
    result = subprocess.run([ruff, "check", "--no-cache", str(ROOT)], capture_output=True, text=True)
    assert result.returncode == 0, result.stdout + result.stderr
