"""The layer rules of design.md, checked by import-linter (contracts in pyproject.toml)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_import_contracts_hold():
    exe = Path(sys.executable).parent / "lint-imports"
    out = subprocess.run([str(exe), "--config", str(ROOT / "pyproject.toml")],
                         capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert out.returncode == 0, out.stdout[-3000:] + out.stderr[-2000:]
    assert "broken" in out.stdout and "0 broken" in out.stdout
