"""docs/api-reference.md is generated from the OpenAPI document and kept up to date."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_api_reference_is_up_to_date():
    out = subprocess.run([sys.executable, str(ROOT / "scripts" / "api_reference.py"), "--check"],
                         capture_output=True, text=True, cwd=ROOT, timeout=120)
    assert out.returncode == 0, out.stdout + out.stderr
