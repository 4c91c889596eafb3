"""Documents (interface layer): test-level specifications and audit reports as PDF,
CSV and JSON, rendered from planning's content types (no database access here)."""

from qualplan.reports.pdf import PdfRenderer, html, pdf_bytes

__all__ = ["PdfRenderer", "html", "pdf_bytes"]
