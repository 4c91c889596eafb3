"""Benchmark of long multi-channel records (issue 19): import, maximax, Welch, FDS.

Run:  .venv/bin/python benchmarks/bench_records.py [--minutes 60] [--db URL] [--keep DIR]

1. writes an invented record of --minutes x 3 channels at 20 kHz as a float32 .npy file
   (band-limited noise with a slow level change, written chunk by chunk, not timed);
2. imports it through qualplan.io.streams and planning.records into the database
   (a new SQLite file unless --db is given): two passes over the memory-mapped file,
   compressed 65,536-sample chunks (timed: "import");
3. one pass per channel over the stored chunks feeding the maximax PSD (1 s windows),
   the Welch PSD (1 Hz lines) and the time-domain FDS at 100 natural frequencies
   (5 Hz to 2 kHz, Q 10, b 8) (timed: "analysis").

Memory: a thread samples RssAnon of this process from /proc/self/status every 20 ms
(anonymous resident memory: the pages of the memory-mapped input file are file-backed
and not counted) and reports its peak per phase. The numeric kernels use numba's
threads (2 on this machine).
"""

from __future__ import annotations

import argparse
import os
import tempfile
import threading
import time
import warnings
from pathlib import Path

import numpy as np

warnings.simplefilter("ignore")

FS = 20_000.0
N_CH = 3


class RssAnon:
    """Peak RssAnon [kB] of this process, sampled by a thread."""

    def __init__(self, every_s: float = 0.02) -> None:
        self.peak_kb = 0
        self._stop = threading.Event()
        self._every = every_s
        self._t = threading.Thread(target=self._run, daemon=True)
        self._t.start()

    @staticmethod
    def now_kb() -> int:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("RssAnon:"):
                    return int(line.split()[1])
        return 0

    def _run(self) -> None:
        while not self._stop.is_set():
            self.peak_kb = max(self.peak_kb, self.now_kb())
            time.sleep(self._every)

    def reset(self) -> None:
        self.peak_kb = self.now_kb()

    def stop(self) -> None:
        self._stop.set()
        self._t.join()
        self.peak_kb = max(self.peak_kb, self.now_kb())


def write_record(path: Path, n: int) -> None:
    import scipy.signal

    arr = np.lib.format.open_memmap(path, mode="w+", dtype=np.float32, shape=(n, N_CH))
    rng = np.random.default_rng(19)
    sos = scipy.signal.butter(4, [10.0, 2000.0], btype="band", fs=FS, output="sos")
    zi = np.zeros((sos.shape[0], 2, N_CH))
    step = 1 << 20
    for i0 in range(0, n, step):
        i1 = min(n, i0 + step)
        w = rng.standard_normal((i1 - i0, N_CH))
        y, zi = scipy.signal.sosfilt(sos, w, axis=0, zi=zi)
        t = np.arange(i0, i1) / FS
        level = 2.0 + np.sin(2 * np.pi * t / 600.0)[:, None]  # slow level change, 10 min
        arr[i0:i1] = (y * level).astype(np.float32)
    arr.flush()
    del arr


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--minutes", type=float, default=60.0)
    ap.add_argument("--db", default=None, help="database URL (default: a new SQLite file)")
    ap.add_argument("--keep", default=None, help="folder for the record and the database")
    args = ap.parse_args()

    from qualplan.dynamics import streaming
    from qualplan.io import streams
    from qualplan.planning import catalog, records
    from qualplan.planning import schemas as s
    from qualplan.planning.access import Actor
    from qualplan.store import migrate
    from qualplan.store.models import Role
    from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work

    folder = Path(args.keep or tempfile.mkdtemp(prefix="qp-bench-records-"))
    folder.mkdir(parents=True, exist_ok=True)
    n = int(round(args.minutes * 60 * FS))
    rec_path = folder / "record.npy"
    if not rec_path.exists() or np.load(rec_path, mmap_mode="r").shape != (n, N_CH):
        t = time.perf_counter()
        write_record(rec_path, n)
        print(f"wrote {rec_path} ({n} x {N_CH} float32, {rec_path.stat().st_size / 1e9:.2f} GB) "
              f"in {time.perf_counter() - t:.1f} s (not part of the benchmark)")
    url = args.db or f"sqlite:///{folder / 'bench.db'}"
    if args.db is None and (folder / "bench.db").exists():
        (folder / "bench.db").unlink()
    migrate.upgrade(url)
    engine = make_engine(url)
    factory = make_sessionmaker(engine, write=True)
    actor = Actor("bench", Role.admin)
    with unit_of_work(factory) as session:
        prog = catalog.create_program(session, actor, s.ProgramCreate(
            name=f"bench {time.time():.0f}"))
        unit = catalog.create_product(session, actor, s.ProductCreate(
            program_id=prog.id, name="unit"))
        unit_id = unit.id

    # warm the compiled kernels on a small record (numba cache), outside the timing
    fn = np.geomspace(5.0, 2000.0, 100)
    warm = np.random.default_rng(0).standard_normal(50_000)

    def make(fs):
        return {"maximax": streaming.MaximaxStream(fs, window_s=1.0),
                "welch": streaming.WelchStream(fs, resolution_hz=1.0),
                "fds": streaming.FdsStream(1.0 / fs, fn, 10.0, 8.0)}

    for st in make(FS).values():
        st.update(warm)
        st.result()

    mem = RssAnon()
    base_kb = mem.now_kb()
    print(f"RssAnon before the benchmark: {base_kb / 1024:.0f} MiB")
    src = streams.open_npy_record(rec_path, fs_hz=FS, unit="g",
                                  channel_names=["ax", "ay", "az"])
    mem.reset()
    t0 = time.perf_counter()
    c0 = time.process_time()
    with unit_of_work(factory) as session:
        rec = records.import_record(session, actor, records.RecordImport(
            product_id=unit_id, name="flight", channel_axes=["X", "Y", "Z"]), src)
        revision_id = rec.revision_id
    t_import = time.perf_counter() - t0
    c_import = time.process_time() - c0
    peak_import = mem.peak_kb
    mem.reset()
    t0 = time.perf_counter()
    c0 = time.process_time()
    with unit_of_work(factory) as session:
        out = records.analyse_record(session, revision_id, make)
    t_an = time.perf_counter() - t0
    c_an = time.process_time() - c0
    mem.stop()
    peak_an = mem.peak_kb
    engine.dispose()

    print(f"record: {args.minutes:g} min x {N_CH} channels at {FS:g} Hz = {n * N_CH / 1e6:.1f} M "
          f"samples; database {url.split('://')[0]}")
    print(f"import:   {t_import:7.1f} s wall, {c_import:7.1f} s CPU, peak RssAnon "
          f"{peak_import / 1024:.0f} MiB")
    print(f"analysis: {t_an:7.1f} s wall, {c_an:7.1f} s CPU, peak RssAnon {peak_an / 1024:.0f} MiB "
          "(maximax 1 s windows + Welch 1 Hz + FDS 100 fn, one pass per channel)")
    print(f"total:    {t_import + t_an:7.1f} s wall; load average {os.getloadavg()[0]:.1f}")
    for ch in out:
        r = ch.results
        print(f"  {ch.name} ({ch.axis}): Welch {r['welch'].grms:.3f} g rms over "
              f"{r['welch'].n_segments} segments; maximax {r['maximax'].n_windows} windows, "
              f"max g rms {r['maximax'].grms_max:.3f}; FDS(100 Hz) "
              f"{float(np.interp(100.0, fn, r['fds'])):.4g} g^8")
    if args.db is None and args.keep is None:
        for p in folder.iterdir():
            p.unlink()
        folder.rmdir()


if __name__ == "__main__":
    main()
