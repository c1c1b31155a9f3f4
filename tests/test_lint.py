"""The code base stays ruff clean (rules in pyproject.toml), so CI enforces the style guide."""

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _ruff(*args: str) -> subprocess.CompletedProcess[str]:
    exe = shutil.which("ruff")
    cmd = [exe, *args] if exe else [sys.executable, "-m", "ruff", *args]
    return subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, timeout=120)


@pytest.mark.parametrize("args", [("check", "."), ("format", "--check", ".")], ids=["check", "format"])
def test_ruff_clean(args):
    result = _ruff(*args)
    assert result.returncode == 0, result.stdout + result.stderr
