"""Documents (interface layer): test-level specifications and audit reports as PDF,
CSV and JSON, rendered from planning's content types (no database access here)."""

from qualplan.reports.pdf import PdfRenderer, html, pdf_bytes
from qualplan.reports.tables import file_stem

__all__ = ["PdfRenderer", "file_stem", "html", "pdf_bytes"]
