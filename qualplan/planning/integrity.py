"""Checking the stored data against their hashes (``qualplan db verify``).

The checks themselves live with the rows (:mod:`qualplan.store.integrity`); this use
case runs them over the whole database and, on SQLite, asks the database file itself
(``PRAGMA integrity_check``).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from sqlalchemy import text
from sqlalchemy.orm import Session

from qualplan.store.integrity import Mismatch, verify


@dataclass
class VerifyReport:
    """Rows checked per table, every row that does not match, and the file check."""

    checked: dict[str, int]
    mismatches: list[Mismatch] = field(default_factory=list)
    #: What SQLite's ``PRAGMA integrity_check`` answered other than "ok" (PostgreSQL: []).
    file_problems: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.mismatches and not self.file_problems


def verify_database(session: Session) -> VerifyReport:
    """Check every hashed row (revisions, record chunks, levels, modal and transfer rule
    revisions, documents) and, on SQLite, the database file's own structure."""
    file_problems: list[str] = []
    if session.get_bind().dialect.name == "sqlite":
        answer = [r[0] for r in session.execute(text("PRAGMA integrity_check"))]
        file_problems = [a for a in answer if a != "ok"]
    checked, bad = verify(session)
    return VerifyReport(checked=checked, mismatches=bad, file_problems=file_problems)
