"""Benchmark: render a ~30-page test-level specification (charts + PDF) and an audit report.

Run: .venv/bin/python benchmarks/bench_reports.py [--db sqlite:///path/qualplan.db]

Without --db the demo scenario is built into a temporary SQLite file first (not timed).
The specification of the demo unit (9 levels, ~23 pages) is extended with copies of its
sections until it has at least 30 pages; then charts, HTML and PDF are timed, each
step as wall time and as CPU time of this process (the machine may be shared).
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

from pypdf import PdfReader

from qualplan.planning import demo, documents
from qualplan.reports import pdf
from qualplan.store import migrate
from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work


def timed(fn, *args):
    w, c = time.perf_counter(), time.process_time()
    out = fn(*args)
    return out, time.perf_counter() - w, time.process_time() - c


def pages(data: bytes) -> int:
    import io

    return len(PdfReader(io.BytesIO(data)).pages)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--db", help="database URL holding the demo (default: build it)")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    tmp = None
    url = args.db
    if url is None:
        tmp = tempfile.TemporaryDirectory()
        url = f"sqlite:///{Path(tmp.name) / 'qualplan.db'}"
        migrate.upgrade(url)
    engine = make_engine(url)
    factory = make_sessionmaker(engine)
    with unit_of_work(factory) as session:
        if args.db is None:
            summary = demo.build_demo(session)
            unit_id, program_id = summary.unit_id, summary.program_id
        else:
            from sqlalchemy import select

            from qualplan.store import models as m

            prod = session.scalar(select(m.Product).where(m.Product.name == demo.UNIT))
            unit_id, program_id = prod.id, prod.program_id
        base = documents.specification_content(session, unit_id, "qualification")
        audit = documents.audit_content(session, program_id)
    engine.dispose()

    content = base
    n_pages = pages(pdf.pdf_bytes(content))
    i = 0
    while n_pages < 30:
        sec = base.sections[i % len(base.sections)]
        i += 1
        extra = sec.model_copy(update={"level_id": sec.level_id + 1000 * i,
                                       "name": f"{sec.name} (copy {i})"})
        content = content.model_copy(update={"sections": [*content.sections, extra]})
        n_pages = pages(pdf.pdf_bytes(content))
    print(f"python {sys.version.split()[0]}; specification with {len(content.sections)} "
          f"levels, {n_pages} pages")
    best = {}
    for _ in range(args.repeat):
        svgs, w1, c1 = timed(pdf.figures, content)
        data, w2, c2 = timed(pdf.pdf_bytes, content, svgs)
        for key, val in (("charts", (w1, c1)), ("pdf", (w2, c2)), ("total", (w1 + w2, c1 + c2))):
            best[key] = min(best.get(key, val), val)
    for key, (w, c) in best.items():
        print(f"specification {key:7s} wall {w:6.2f} s  cpu {c:6.2f} s  (best of {args.repeat})")
    data, w, c = timed(pdf.pdf_bytes, audit)
    print(f"audit report ({pages(data)} pages, {len(audit.items)} requirements) "
          f"wall {w:.2f} s cpu {c:.2f} s")
    if tmp is not None:
        tmp.cleanup()


if __name__ == "__main__":
    main()
