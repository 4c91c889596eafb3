"""Plain text tables and JSON output for the CLI."""

from __future__ import annotations

import json
import sys
from collections.abc import Iterable, Sequence
from contextlib import contextmanager
from typing import Any

import typer
from pydantic import BaseModel


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
        return f"{value:.4g}"
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
