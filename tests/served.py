"""Waiting for a `qualplan serve` process started by a test to answer its health route."""

from __future__ import annotations

import subprocess
import time
from pathlib import Path

import httpx


def wait_for_health(base: str, proc: subprocess.Popen, timeout_s: float,
                    log: Path | None = None) -> None:
    """Return once `base`/health answers 200; AssertionError (with the end of the server's
    `log`, when given) if the process exits or `timeout_s` passes first."""
    deadline = time.monotonic() + timeout_s
    while True:
        try:
            if httpx.get(f"{base}/health", timeout=1.0).status_code == 200:
                return
        except httpx.HTTPError:
            pass
        if proc.poll() is not None or time.monotonic() > deadline:
            tail = log.read_text()[-3000:] if log is not None and log.exists() else ""
            raise AssertionError(f"the server at {base} did not start in {timeout_s:g} s "
                                 f"(exit code {proc.poll()})\n{tail}")
        time.sleep(0.2)
