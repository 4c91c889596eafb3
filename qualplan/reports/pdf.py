"""PDF documents from Jinja2 templates (templates/reports/) with WeasyPrint.

The Jinja2 environment autoescapes and uses StrictUndefined, so a missing field is an
error, never an empty cell. WeasyPrint may read only the template folder and ``data:``
URLs (the charts), nothing from the network.
"""

from __future__ import annotations

import base64
import math
import os
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import UTC, datetime
from pathlib import Path

from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

from qualplan import __version__
from qualplan.planning import margins, wording
from qualplan.planning.documents import AuditContent, DocumentContent, SpecificationContent
from qualplan.reports import charts, tables
from qualplan.reports.files import write_atomic
from qualplan.resources import data_dir


def _templates() -> Path:
    return data_dir("templates")


def _num(x, digits: int = 4) -> str:
    """A number in a table cell: 4 significant digits (planning.wording.number)."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    return wording.number(float(x), digits)


def _signed(x, decimals: int = 2, against=None) -> str:
    """dB, dB/oct and margins of safety as engineers write them: sign and 2 decimals, or
    more where a margin printed beside its requirement (``against``) needs them to show
    on which side it lies."""
    return wording.signed(x, against, decimals)


def _date(d) -> str:
    return f"{d:%Y-%m-%d}"


def _datetime(d) -> str:
    return f"{d:%Y-%m-%d %H:%M} UTC"


def _svg_uri(svg: str | None) -> str | None:
    if svg is None:
        return None
    return "data:image/svg+xml;base64," + base64.b64encode(svg.encode()).decode()


def environment() -> Environment:
    env = Environment(
        loader=FileSystemLoader(str(_templates())),
        autoescape=select_autoescape(["html", "xml"]),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters.update(num=_num, signed=_signed, date=_date, datetime=_datetime,
                       status=wording.status, kind=wording.kind, hz=wording.frequency,
                       duration=wording.duration, db=wording.decibels,
                       count=wording.count, combination=wording.combination,
                       verdict_words=margins.verdict_words)
    env.globals["qualplan_version"] = __version__
    return env


def _fetcher():
    """A URL fetcher that reads data: URLs and files under templates/ only."""
    from weasyprint.urls import URLFetcher

    root = _templates().resolve().as_uri()

    class TemplateOnlyFetcher(URLFetcher):
        def fetch(self, url, headers=None):
            if not (url.startswith("data:") or url.startswith(root)):
                raise ValueError(f"refused to fetch {url!r} while rendering a document")
            return super().fetch(url, headers)

    return TemplateOnlyFetcher(allowed_protocols=("data", "file"), fail_on_errors=True)


def figures(content: DocumentContent) -> dict[int | str, dict[str, str | None]]:
    """Every chart of a document as SVG text: a specification's by level id (and
    ``axis-X`` ...), an audit's test records by ``record-<evidence id>``."""
    out: dict[int | str, dict[str, str | None]] = {}
    if isinstance(content, AuditContent):
        for rec in content.records:
            out[f"record-{rec.evidence_id}"] = {
                "record": charts.record_chart(rec, caution=False)}
        return out
    for sec in content.sections:
        out[sec.level_id] = {
            "level": charts.level_chart(sec),
            "coverage": charts.coverage_chart(sec.derivation.coverage,
                                              f"Coverage of {sec.name} #{sec.number}"),
        }
    for ax in content.axes:
        out[f"axis-{ax.axis}"] = {
            "coverage": charts.coverage_chart(ax.coverage,
                                              f"Coverage of axis {ax.axis}: all its tests"),
        }
    return out


def html(content: DocumentContent, svgs: dict | None = None) -> str:
    """The document as HTML (print CSS), charts embedded as SVG data URLs."""
    env = environment()
    if isinstance(content, SpecificationContent):
        svgs = svgs if svgs is not None else figures(content)
        uris = {k: {name: _svg_uri(svg) for name, svg in v.items()} for k, v in svgs.items()}
        template = env.get_template("reports/specification.html")
        return template.render(doc=content, figures=uris, content_hash=content.content_hash(),
                               file_stem=lambda s: tables.section_file_stem(content, s))
    svgs = svgs if svgs is not None else figures(content)
    uris = {k: {name: _svg_uri(svg) for name, svg in v.items()} for k, v in svgs.items()}
    template = env.get_template("reports/audit.html")
    return template.render(doc=content, figures=uris, content_hash=content.content_hash())


_font_clock = threading.Lock()


@contextmanager
def _font_timestamps(at: datetime) -> Iterator[None]:
    """Stamp the fonts embedded while inside with `at` (naive: UTC), not the wall clock.

    Without HarfBuzz-Subset, WeasyPrint subsets fonts with fontTools, which writes the
    current time into each subset font's ``head.modified`` field: two renders a second
    apart then differ. fontTools reads the time from ``SOURCE_DATE_EPOCH`` when it is set
    (the reproducible-builds convention, https://reproducible-builds.org/specs/source-date-epoch/),
    so it is set for the render and restored after. The lock keeps concurrent renders
    from restoring it under each other.
    """
    if at.tzinfo is None:
        at = at.replace(tzinfo=UTC)  # the store keeps UTC times
    with _font_clock:
        before = os.environ.get("SOURCE_DATE_EPOCH")
        os.environ["SOURCE_DATE_EPOCH"] = str(max(0, int(at.timestamp())))
        try:
            yield
        finally:
            if before is None:
                del os.environ["SOURCE_DATE_EPOCH"]
            else:
                os.environ["SOURCE_DATE_EPOCH"] = before


def pdf_bytes(content: DocumentContent, svgs: dict | None = None) -> bytes:
    """The document as PDF bytes (for the API route that serves it).

    The same content gives the same bytes, in any process and at any time: the PDF has
    no creation date, its identifier is the document number and the embedded fonts carry
    the content's date.
    """
    from weasyprint import HTML

    document = HTML(string=html(content, svgs), base_url=str(_templates() / "reports") + "/",
                    url_fetcher=_fetcher())
    with _font_timestamps(content.date):
        return document.write_pdf(pdf_identifier=content.number.encode(),
                                  uncompressed_pdf=False)


def _stem(content: DocumentContent) -> str:
    return tables.file_stem(content)


class PdfRenderer:
    """Implements planning's DocumentRenderer: PDF + JSON + CSV tables in a folder.

    ``figures=True`` also writes every chart as an SVG file (``<stem>-figures/``).
    """

    def __init__(self, *, figures: bool = False) -> None:
        self.figures = figures

    def render(self, content: DocumentContent, out_dir: Path) -> list[Path]:
        out_dir = Path(out_dir)
        out_dir.mkdir(parents=True, exist_ok=True)
        svgs = figures(content) if isinstance(content, SpecificationContent | AuditContent) \
            else None
        pdf = out_dir / f"{_stem(content)}.pdf"
        write_atomic(pdf, pdf_bytes(content, svgs))
        paths = [pdf, *tables.write_tables(content, out_dir)]
        if self.figures and svgs is not None:
            paths.extend(write_figures(content, out_dir / f"{_stem(content)}-figures", svgs))
        return paths


def write_figures(content: DocumentContent, folder: Path, svgs: dict | None = None
                  ) -> list[Path]:
    """Write every chart of a document as an SVG file into `folder`."""
    svgs = svgs if svgs is not None else figures(content)
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    if isinstance(content, AuditContent):
        for rec in content.records:
            p = folder / f"{content.number}-record-{rec.evidence_id}.svg"
            write_atomic(p, svgs[f"record-{rec.evidence_id}"]["record"])
            out.append(p)
        return out
    for sec in content.sections:
        stem = tables.section_file_stem(content, sec)
        for name, svg in svgs[sec.level_id].items():
            if svg is None:
                continue
            p = folder / (f"{stem}.svg" if name == "level" else f"{stem}-{name}.svg")
            write_atomic(p, svg)
            out.append(p)
    for ax in content.axes:
        svg = svgs.get(f"axis-{ax.axis}", {}).get("coverage")
        if svg is not None:
            p = folder / f"{content.number}-{ax.axis}-axis-coverage.svg"
            write_atomic(p, svg)
            out.append(p)
    return out


__all__ = ["PdfRenderer", "environment", "figures", "html", "pdf_bytes", "write_figures"]
