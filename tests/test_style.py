"""The code base stays ruff clean (the contributor guide's style rule, enforced in CI)."""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def test_ruff_clean():
    exe = shutil.which("ruff")
    if exe is None:
        pytest.importorskip("ruff")
        cmd = [sys.executable, "-m", "ruff"]
    else:
        cmd = [exe]
    result = subprocess.run([*cmd, "check", "."], cwd=ROOT, capture_output=True, text=True,
                            timeout=120)
    assert result.returncode == 0, result.stdout + result.stderr
