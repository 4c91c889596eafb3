"""Input rules shared by every interface: numbers, ids, names, texts, document numbers.

The command schemas (``planning.schemas``) are built from the types here, so the API,
the web forms and the CLI refuse the same inputs with the same rule:

- numbers are JSON numbers, never strings ("2") nor booleans, and finite (no NaN, no
  infinity); typed numbers (forms, CLI options) are plain decimal literals (``2000``,
  ``2e3``; not ``2_000``, ``0x10``, ``nan``);
- ids and counts fit the database's 32-bit integer (PostgreSQL ``integer``);
- a name is one line of printable text, not blank; a text may span lines but holds no
  other control character (NUL, escape sequences, ...);
- a document number is a plain file-name-safe token (it names the files written).
"""

from __future__ import annotations

import math
import re
import unicodedata
from typing import Annotated, Any

from pydantic import AfterValidator, Field

from qualplan.planning.errors import ValidationFailed

#: Largest id or count the database stores (PostgreSQL ``integer``, 2^31 - 1).
MAX_INT = 2**31 - 1
#: Longest free text accepted (characters).
MAX_TEXT = 20_000

_NUMBER = re.compile(r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?")
_INTEGER = re.compile(r"[+-]?\d+")
_DOC_NUMBER = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,79}")


def _bad_char(text: str, allow_newlines: bool) -> int | None:
    """Index of the first character a stored text may not hold, or None."""
    for i, ch in enumerate(text):
        if allow_newlines and ch in "\n\r\t":
            continue
        cat = unicodedata.category(ch)
        # Cc: C0/C1 controls (NUL, ESC, DEL, ...); Zl/Zp: line and paragraph separators;
        # Cs: lone surrogates (not encodable as UTF-8).
        if cat in ("Cc", "Zl", "Zp", "Cs"):
            return i
    return None


def line_rule(text: str) -> str:
    """One line of printable text, not blank (surrounding spaces are removed)."""
    i = _bad_char(text, allow_newlines=False)
    if i is not None:
        raise ValueError(f"must be one line of printable text (character {i} is "
                         f"{text[i]!r}, a control character or line break)")
    text = text.strip()
    if not text:
        raise ValueError("must not be blank")
    return text


def text_rule(text: str) -> str:
    """Free text: line breaks and tabs allowed, no other control character."""
    i = _bad_char(text, allow_newlines=True)
    if i is not None:
        raise ValueError(f"must be printable text (character {i} is {text[i]!r}, a control "
                         "character)")
    return text


def _in_range(n: int) -> int:
    if not -MAX_INT <= n <= MAX_INT:
        raise ValueError(f"must be at most {MAX_INT} in size (the database's integer)")
    return n


def _bad_id(n: int) -> int:
    raise ValueError(f"must be an id, 1..{MAX_INT}")


def _finite(x: float) -> float:
    if not math.isfinite(x):  # belt and braces: allow_inf_nan=False already refuses
        raise ValueError("must be a finite number")
    return x


# --- pydantic types ---------------------------------------------------------------------

#: A finite JSON number (an integer is accepted as a number; a string is not).
Num = Annotated[float, Field(strict=True, allow_inf_nan=False), AfterValidator(_finite)]
#: An id of a stored row (1 .. 2^31 - 1).
Id = Annotated[int, Field(strict=True), AfterValidator(
    lambda n: n if 1 <= n <= MAX_INT else _bad_id(n))]
#: A whole number that the database stores (|n| <= 2^31 - 1).
#: (The range is a validator, not ge/le, so that a field's own Field(ge=...) still holds.)
Int = Annotated[int, Field(strict=True), AfterValidator(_in_range)]
#: A name: one printable line, 1..200 characters.
Name = Annotated[str, Field(min_length=1, max_length=200), AfterValidator(line_rule)]
#: A short key or unit: one printable line, 1..80 characters.
Key = Annotated[str, Field(min_length=1, max_length=80), AfterValidator(line_rule)]
#: An optional one-line text (may be empty): part numbers, sources.
Line = Annotated[str, Field(max_length=500), AfterValidator(
    lambda t: line_rule(t) if t.strip() else "")]
#: Free text (descriptions, notes, rationales), line breaks allowed.
Text = Annotated[str, Field(max_length=MAX_TEXT), AfterValidator(text_rule)]


# --- the same rules for values typed as text (forms, CLI options) ------------------------


def parse_number(field: str, raw: Any, *, integer: bool = False) -> float | int:
    """A number typed as text: a plain decimal literal, finite (and whole for `integer`).

    ``float()`` alone would also take ``2_000``, ``nan``, ``inf`` and ``1e999``; those are
    refused here with the field and the value.
    """
    if isinstance(raw, bool):
        raise ValidationFailed(field, raw, "must be a number")
    if isinstance(raw, int | float):
        text = repr(raw)
    elif isinstance(raw, str):
        text = raw.strip()
    else:
        raise ValidationFailed(field, raw, "must be a number")
    if integer:
        if not _INTEGER.fullmatch(text):
            raise ValidationFailed(field, raw, "must be a whole number (digits only)")
        value = int(text)
        if abs(value) > MAX_INT:
            raise ValidationFailed(field, raw, f"must be at most {MAX_INT} in size")
        return value
    if not _NUMBER.fullmatch(text) and not (isinstance(raw, float) and math.isfinite(raw)):
        raise ValidationFailed(field, raw, "must be a decimal number such as 2000 or 2e3")
    value = float(text)
    if not math.isfinite(value):
        raise ValidationFailed(field, raw, "must be a finite number")
    return value


def check_line(field: str, value: str) -> str:
    """`line_rule` raising ValidationFailed (for planning code and interfaces)."""
    try:
        return line_rule(value)
    except ValueError as exc:
        raise ValidationFailed(field, value, str(exc)) from exc


def check_document_number(value: str) -> str:
    """A document number: letters, digits, ``.``, ``_`` and ``-``, 1..80 characters,
    starting with a letter or digit, no ``..`` (it becomes part of file names)."""
    if not isinstance(value, str) or not _DOC_NUMBER.fullmatch(value) or ".." in value:
        raise ValidationFailed(
            "number", value,
            "must be 1..80 letters, digits, '.', '_' or '-', starting with a letter or "
            "digit, without '..' (it names the files written)",
        )
    return value
