"""The public API is typed (the package ships ``py.typed``): mypy must pass over it, so it stays so.

mypy reads its settings from ``[tool.mypy]`` in pyproject.toml. The cache goes to a fresh temporary
directory, so the check runs the same on a fresh CI checkout (no ``.mypy_cache``) as on a developer's tree.
"""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_mypy_clean(tmp_path):
    cmd = [sys.executable, "-m", "mypy", "--cache-dir", str(tmp_path / "mypy_cache"), "src/logitscope"]
    result = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, timeout=600)
    output = result.stdout + result.stderr
    if result.returncode != 0:
        print(output)
    assert result.returncode == 0, output
