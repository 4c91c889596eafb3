"""Documents (interface layer): test-level specifications and audit reports as PDF,
CSV and JSON, rendered from planning's content types (no database access here)."""

from qualplan.reports.loads import LoadsRenderer
from qualplan.reports.pdf import PdfRenderer, html, pdf_bytes
from qualplan.reports.tables import file_stem

#: The renderers by name, for the document jobs (``planning.jobs.register_renderers``).
RENDERERS = {"pdf": PdfRenderer, "loads": LoadsRenderer}

__all__ = ["RENDERERS", "LoadsRenderer", "PdfRenderer", "file_stem", "html", "pdf_bytes"]
