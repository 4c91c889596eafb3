"""Errors raised by the numeric core.

Every input check names the field, the offending value and the rule, so the
same fault reads the same from a notebook, the CLI or the HTTP API.
"""

from __future__ import annotations

from typing import Any


class InputError(ValueError):
    """Bad input to a numeric function.

    Attributes
    ----------
    field : str
        Name of the parameter or column at fault.
    value : Any
        The offending value (or a short description of it).
    rule : str
        What the value should have been.
    """

    def __init__(self, field: str, value: Any, rule: str) -> None:
        self.field = field
        self.value = value
        self.rule = rule
        super().__init__(f"{field}={_short(value)}: {rule}")


def _short(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


class AccuracyWarning(UserWarning):
    """A result was computed but may be inaccurate (e.g. fn near Nyquist)."""
