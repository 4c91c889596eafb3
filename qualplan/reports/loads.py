"""The analysis loads package as PDF, CSV tables and JSON (planning.loads content)."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

from qualplan.planning.loads import LoadsContent, LoadsSection
from qualplan.reports import pdf as _pdf
from qualplan.reports.files import write_atomic


def section_file_stem(content: LoadsContent, section: LoadsSection) -> str:
    name = "".join(c if c.isalnum() else "-" for c in section.name).strip("-").lower()
    return f"{content.number}-r{content.revision}-{section.axis}-{section.kind}-{name}"


def section_csv(content: LoadsContent, section: LoadsSection) -> str:
    """One level's table; `#` lines carry the document, facts and solver settings."""
    buf = io.StringIO()
    buf.write(f"# {content.number} revision {content.revision}: {content.title}\n")
    buf.write(f"# level {section.name} #{section.number}, axis {section.axis}, {section.kind}, "
              f"hash {section.level_hash}\n")
    for f in section.facts:
        buf.write(f"# {f.label}: {f.value}\n")
    for st in section.settings:
        buf.write(f"# solver setting, {st.setting}: {st.value} ({st.basis})\n")
    buf.write(f"# {content.caution}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(section.keys)
    for r in section.rows:
        w.writerow([repr(float(x)) for x in r])
    return buf.getvalue()


def content_json(content: LoadsContent) -> str:
    data = content.model_dump(mode="json")
    data["content_hash"] = content.content_hash()
    return json.dumps(data, indent=2, sort_keys=True) + "\n"


def html(content: LoadsContent) -> str:
    template = _pdf.environment().get_template("reports/loads.html")
    return template.render(doc=content, content_hash=content.content_hash(),
                           file_stem=lambda s: section_file_stem(content, s))


def pdf_bytes(content: LoadsContent) -> bytes:
    from weasyprint import HTML

    document = HTML(string=html(content), base_url=str(_pdf._templates() / "reports") + "/",
                    url_fetcher=_pdf._fetcher())
    return document.write_pdf(metadata=None, pdf_identifier=content.number.encode(),
                              uncompressed_pdf=False)


class LoadsRenderer:
    """Implements planning's DocumentRenderer for a loads package: PDF + JSON + CSV."""

    def render(self, content: LoadsContent, out_dir: Path) -> list[Path]:
        out_dir = Path(out_dir)
        out_dir.mkdir(parents=True, exist_ok=True)
        stem = f"{content.number}-r{content.revision}"
        paths = [out_dir / f"{stem}.pdf", out_dir / f"{stem}.json"]
        write_atomic(paths[0], pdf_bytes(content))
        write_atomic(paths[1], content_json(content))
        for s in content.sections:
            p = out_dir / f"{section_file_stem(content, s)}.csv"
            write_atomic(p, section_csv(content, s))
            paths.append(p)
        return paths


__all__ = ["LoadsRenderer", "content_json", "html", "pdf_bytes", "section_csv"]
