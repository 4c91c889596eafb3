"""Plain text tables and JSON output for the CLI."""

from __future__ import annotations

import json
import sys
import unicodedata
from collections.abc import Iterable, Sequence
from contextlib import contextmanager
from typing import Any

import typer
from pydantic import BaseModel


def safe_text(text: str) -> str:
    """`text` with every control character but newline and tab shown as an escape
    (``\\x1b``), so stored names cannot send escape sequences to the terminal."""
    return "".join(
        c if c in "\n\t" or unicodedata.category(c) not in ("Cc", "Cs")
        else c.encode("unicode_escape", "backslashreplace").decode("ascii")
        for c in text
    )


class SafeStream:
    """A text stream that writes `safe_text` of what it is given (the CLI's stdout)."""

    def __init__(self, stream) -> None:
        self._stream = stream

    def write(self, text) -> int:
        if not isinstance(text, str):  # bytes (binary output): written as they are
            return self._stream.write(text)
        self._stream.write(safe_text(text))
        return len(text)

    def __getattr__(self, name: str):
        return getattr(self._stream, name)


def emit_json(value: Any) -> None:
    if isinstance(value, BaseModel):
        text = value.model_dump_json(indent=2)
    elif isinstance(value, list) and value and isinstance(value[0], BaseModel):
        text = "[" + ",\n".join(v.model_dump_json(indent=2) for v in value) + "]"
    else:
        text = json.dumps(value, indent=2, default=str)
    typer.echo(text)


def table(headers: Sequence[str], rows: Iterable[Sequence[Any]]) -> None:
    """Print an aligned text table (headers carry the units)."""
    cells = [[_fmt(c) for c in row] for row in rows]
    widths = [len(h) for h in headers]
    for row in cells:
        widths = [max(w, len(c)) for w, c in zip(widths, row, strict=True)]
    line = "  ".join(h.ljust(w) for h, w in zip(headers, widths, strict=True))
    typer.echo(line.rstrip())
    typer.echo("  ".join("-" * w for w in widths))
    for row in cells:
        typer.echo("  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)).rstrip())


def _fmt(value: Any) -> str:
    if value is None:
        return "-"
    if isinstance(value, float):
        from qualplan.planning import wording

        return wording.number(value)
    return str(value)


@contextmanager
def progress(message: str):
    """A spinner on a terminal while a long computation runs; silent otherwise."""
    if sys.stderr.isatty():
        from rich.console import Console

        with Console(stderr=True).status(message):
            yield
    else:
        yield
