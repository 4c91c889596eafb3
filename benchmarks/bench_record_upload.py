"""Benchmark of a long record uploaded through the API (issue 19): the server's memory.

Run:  .venv/bin/python benchmarks/bench_record_upload.py [--minutes 10] [--port 8765]

1. a new SQLite database with an engineer's token and a product (through the CLI);
2. an invented record of --minutes x 3 channels at 20 kHz written chunk by chunk as a
   float64 .npy file (not timed);
3. `qualplan serve` started under `/usr/bin/time -v`; the file is posted to
   POST /api/v1/environments/upload with channel_axes=X,Y,Z, streamed from disk by httpx;
   a thread samples the server's RssAnon (/proc/PID/status: anonymous resident memory;
   pages of memory-mapped files are not counted) every 20 ms;
4. the server is stopped and the peak RssAnon and /usr/bin/time's maximum resident set
   size (which does count file pages mapped by the .npy reader) are printed.
"""

from __future__ import annotations

import argparse
import os
import re
import signal
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import httpx
import numpy as np

FS = 20_000.0
BIN = Path(sys.executable).parent


def rss_anon_kb(pid: int) -> int:
    text = Path(f"/proc/{pid}/status").read_text()
    return int(re.search(r"RssAnon:\s+(\d+)", text).group(1))


def cli(db: str, *args: str) -> str:
    out = subprocess.run([str(BIN / "qualplan"), *args, "--db", db], check=True,
                         capture_output=True, text=True)
    return out.stdout.strip()


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--minutes", type=float, default=10.0)
    ap.add_argument("--port", type=int, default=8765)
    a = ap.parse_args()
    folder = Path(tempfile.mkdtemp(prefix="qp-upload-bench-"))
    db = f"sqlite:///{folder / 'q.db'}"
    cli(db, "init")
    cli(db, "user", "add", "bench", "--role", "engineer")
    token = cli(db, "token", "create", "bench", "--label", "bench").split()[-1]
    cli(db, "program", "add", "Bench")
    cli(db, "product", "add", "Box", "--program", "Bench")
    n = int(a.minutes * 60 * FS)
    path = folder / "long.npy"
    out = np.lib.format.open_memmap(path, mode="w+", dtype="<f8", shape=(n, 3))
    rng = np.random.default_rng(19)
    for i in range(0, n, 1 << 20):
        m = min(1 << 20, n - i)
        out[i:i + m] = rng.standard_normal((m, 3)) * np.array([1.0, 2.0, 0.5])
    out.flush()
    del out
    size = path.stat().st_size
    env = {**os.environ, "QUALPLAN_DATABASE_URL": db}
    server = subprocess.Popen(["/usr/bin/time", "-v", str(BIN / "qualplan"), "serve",
                               "--port", str(a.port)], env=env, stderr=subprocess.PIPE,
                              stdout=subprocess.DEVNULL, text=True)
    base = f"http://127.0.0.1:{a.port}/api/v1"
    for _ in range(200):
        try:
            if httpx.get(base + "/health").status_code == 200:
                break
        except httpx.HTTPError:
            time.sleep(0.1)
    pid = int(subprocess.check_output(["pgrep", "-P", str(server.pid)]).split()[0])
    headers = {"Authorization": f"Bearer {token}"}
    program_id = httpx.get(base + "/programs", headers=headers).json()["items"][0]["id"]
    product_id = httpx.get(f"{base}/programs/{program_id}/products",
                           headers=headers).json()["items"][0]["id"]
    idle = rss_anon_kb(pid)
    peak, stop = [idle], threading.Event()

    def sample() -> None:
        while not stop.is_set():
            try:
                peak[0] = max(peak[0], rss_anon_kb(pid))
            except (OSError, AttributeError):
                pass
            time.sleep(0.02)

    t = threading.Thread(target=sample, daemon=True)
    t.start()
    t0 = time.perf_counter()
    with open(path, "rb") as fh:
        r = httpx.post(base + "/environments/upload", headers=headers, timeout=3600,
                       files={"file": ("long.npy", fh, "application/octet-stream")},
                       data={"product_id": str(product_id), "kind": "time_history",
                             "axis": "all", "value_units": "g", "sample_rate_hz": str(FS),
                             "channel_axes": "X,Y,Z", "name": "long record"})
    wall = time.perf_counter() - t0
    stop.set()
    t.join()
    os.kill(pid, signal.SIGINT)  # the server, not /usr/bin/time (which waits for it)
    err = server.communicate(timeout=60)[1]
    max_rss = re.search(r"Maximum resident set size \(kbytes\): (\d+)", err)
    print(f"upload of {a.minutes:g} min x 3 channels x 20 kHz ({size / 2**20:.0f} MiB .npy):"
          f" HTTP {r.status_code} in {wall:.1f} s wall")
    print(f"server RssAnon: idle {idle / 1024:.0f} MiB, peak {peak[0] / 1024:.0f} MiB")
    if max_rss:
        print(f"server maximum resident set size (/usr/bin/time -v, with mapped file "
              f"pages): {int(max_rss.group(1)) / 1024:.0f} MiB")
    if r.status_code != 201:
        print(r.text[:500])
    subprocess.run(["rm", "-rf", str(folder)], check=False)


if __name__ == "__main__":
    main()
