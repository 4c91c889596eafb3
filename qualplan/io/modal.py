"""Reader of modal summaries (a structural model's table of modes) from CSV or JSON.

A modal summary lists, per mode: the natural frequency [Hz], its damping (ratio
``zeta`` or amplification ``q``), the modal effective mass per axis [kg], and
optionally the participation factor per axis and one response quantity per unit
modal coordinate (e.g. a stress in MPa or an acceleration in g at a point of
interest), with its unit.

CSV: one header row, then one row per mode; columns by name (case-insensitive,
any order; ``#`` lines are comments, ``# response_unit: MPa`` declares the
response unit)::

    mode, fn_hz, zeta, meff_x_kg, meff_y_kg, meff_z_kg, gamma_x, gamma_y, gamma_z, response

``fn_hz`` and one of ``zeta``/``q`` are required; at least one ``meff_<axis>_kg``
column; the others are optional. JSON: ``{"modes": [{"fn_hz": ..., "zeta": ...,
"meff_kg": {"X": ..., "Y": ..., "Z": ...}, "participation": {...},
"response": ...}], "response_unit": "..."}``.

Masses are in kg and frequencies in Hz: the column names carry the unit; no other
unit is read.
"""

from __future__ import annotations

import csv
import io as _io
import json
import math
from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

from qualplan.dynamics.errors import InputError

__all__ = ["AXES", "ModalTable", "read_modal_summary"]

#: Axes a modal summary gives effective masses for.
AXES = ("X", "Y", "Z")


@dataclass(frozen=True, eq=False)
class ModalTable:
    """A table of modes.

    Attributes
    ----------
    fn_hz : ndarray, shape (k,)
        Natural frequencies, strictly increasing, > 0. [Hz]
    zeta : ndarray, shape (k,)
        Damping ratios in (0, 1). [unitless]
    meff_kg : Mapping axis -> ndarray (k,)
        Modal effective masses, >= 0, for the axes given. [kg]
    participation : Mapping axis -> ndarray (k,)
        Participation factors per axis (may be empty). [sqrt(kg) for mass-normalised modes]
    response : ndarray (k,) or None
        Response quantity per unit modal coordinate. [response_unit]
    response_unit : str
        Unit of `response` ("" when absent).
    source : str
        File name.
    metadata : Mapping
        Format details (columns read).
    """

    fn_hz: np.ndarray
    zeta: np.ndarray
    meff_kg: MappingProxyType
    participation: MappingProxyType
    response: np.ndarray | None
    response_unit: str
    source: str
    metadata: MappingProxyType

    def to_spec(self) -> dict:
        """The table as plain JSON (the stored revision content)."""
        modes = []
        for i in range(self.fn_hz.size):
            row = {
                "mode": i + 1,
                "fn_hz": float(self.fn_hz[i]),
                "zeta": float(self.zeta[i]),
                "meff_kg": {a: float(v[i]) for a, v in self.meff_kg.items()},
            }
            if self.participation:
                row["participation"] = {a: float(v[i]) for a, v in self.participation.items()}
            if self.response is not None:
                row["response"] = float(self.response[i])
            modes.append(row)
        return {"modes": modes, "response_unit": self.response_unit}


def _num(field: str, value) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError) as exc:
        raise InputError(field, value, "must be a number") from exc
    if not math.isfinite(x):
        raise InputError(field, value, "must be finite")
    return x


def _rows_from_csv(text: str) -> tuple[list[dict], str, list[str]]:
    unit = ""
    lines = []
    for line in text.splitlines():
        s = line.strip()
        if s.startswith("#"):
            body = s.lstrip("#").strip()
            if body.lower().startswith("response_unit:"):
                unit = body.split(":", 1)[1].strip()
            continue
        if s:
            lines.append(line)
    if len(lines) < 2:
        raise InputError("file", f"{len(lines)} non-comment lines", "needs a header row and "
                         "at least one mode")
    try:
        dialect = csv.Sniffer().sniff(lines[0], delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    reader = csv.reader(_io.StringIO("\n".join(lines)), dialect)
    header = [h.strip().lower() for h in next(reader)]
    rows = []
    for n, r in enumerate(reader, start=2):
        if len(r) != len(header):
            raise InputError(f"row {n}", f"{len(r)} cells", f"must have {len(header)} cells "
                             "like the header")
        rows.append(dict(zip(header, (c.strip() for c in r), strict=True)))
    modes = []
    for n, r in enumerate(rows, start=2):
        mode: dict = {"row": n}
        for key, val in r.items():
            if val == "":
                continue
            mode[key] = val
        modes.append(mode)
    return modes, unit, header


def _normalise_json(doc) -> tuple[list[dict], str, list[str]]:
    if not isinstance(doc, dict) or not isinstance(doc.get("modes"), list):
        raise InputError("modes", type(doc).__name__, "JSON must be an object with a 'modes' list")
    out = []
    for i, m in enumerate(doc["modes"]):
        if not isinstance(m, dict):
            raise InputError(f"modes[{i}]", m, "must be an object")
        row: dict = {"row": f"modes[{i}]"}
        for k in ("fn_hz", "zeta", "q", "response"):
            if m.get(k) is not None:
                row[k] = m[k]
        for name, prefix, suffix in (("meff_kg", "meff_", "_kg"), ("participation", "gamma_", "")):
            part = m.get(name) or {}
            if not isinstance(part, dict):
                raise InputError(f"modes[{i}].{name}", part, "must be an object {axis: value}")
            for axis, val in part.items():
                row[f"{prefix}{str(axis).lower()}{suffix}"] = val
        out.append(row)
    unit = str(doc.get("response_unit") or "")
    return out, unit, sorted({k for r in out for k in r if k != "row"})


def read_modal_summary(filename: str, content: bytes, *, response_unit: str | None = None
                       ) -> ModalTable:
    """Read a modal summary from CSV or JSON bytes (chosen by the file name's extension).

    Parameters
    ----------
    filename : str
        Name of the file (``.csv``, ``.txt`` or ``.json``).
    content : bytes
        The file's content, UTF-8.
    response_unit : str, optional
        Unit of the response column; overrides the file's declaration. Refused
        when the file declares a different one.

    Returns
    -------
    ModalTable

    Raises
    ------
    InputError
        Naming the row or mode and the column at fault.
    """
    try:
        text = content.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError("file", filename, "must be UTF-8 text") from exc
    low = filename.lower()
    if low.endswith(".json"):
        try:
            doc = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError("file", filename, f"is not valid JSON ({exc.msg}, line {exc.lineno})"
                             ) from exc
        rows, unit, columns = _normalise_json(doc)
    elif low.endswith((".csv", ".txt")):
        rows, unit, columns = _rows_from_csv(text)
    else:
        raise InputError("file", filename, "must be .csv, .txt or .json")
    if response_unit is not None:
        if unit and unit != response_unit:
            raise InputError("response_unit", response_unit,
                             f"differs from the unit the file declares ({unit!r})")
        unit = response_unit
    if not rows:
        raise InputError("modes", "0 modes", "needs at least one mode")
    fn, zeta, resp = [], [], []
    meff = {a: [] for a in AXES}
    gamma = {a: [] for a in AXES}
    have_meff = {a: any(f"meff_{a.lower()}_kg" in r for r in rows) for a in AXES}
    have_gamma = {a: any(f"gamma_{a.lower()}" in r for r in rows) for a in AXES}
    have_resp = any("response" in r for r in rows)
    if not any(have_meff.values()):
        raise InputError("meff_<axis>_kg", columns, "at least one effective-mass column "
                         "(meff_x_kg, meff_y_kg or meff_z_kg) is required")
    for r in rows:
        where = r["row"] if isinstance(r["row"], str) else f"row {r['row']}"
        if "fn_hz" not in r:
            raise InputError(f"{where}: fn_hz", None, "is required")
        f = _num(f"{where}: fn_hz", r["fn_hz"])
        if f <= 0:
            raise InputError(f"{where}: fn_hz", f, "must be > 0")
        if "zeta" in r:
            z = _num(f"{where}: zeta", r["zeta"])
        elif "q" in r:
            q = _num(f"{where}: q", r["q"])
            if q <= 0.5:
                raise InputError(f"{where}: q", q, "must be > 0.5")
            z = 1.0 / (2.0 * q)
        else:
            raise InputError(f"{where}: zeta", None, "give zeta (damping ratio) or q")
        if not 0 < z < 1:
            raise InputError(f"{where}: zeta", z, "must lie in (0, 1)")
        fn.append(f)
        zeta.append(z)
        for a in AXES:
            key = f"meff_{a.lower()}_kg"
            if have_meff[a]:
                if key not in r:
                    raise InputError(f"{where}: {key}", None, "is missing (the column is given "
                                     "for other modes)")
                v = _num(f"{where}: {key}", r[key])
                if v < 0:
                    raise InputError(f"{where}: {key}", v, "must be >= 0")
                meff[a].append(v)
            key = f"gamma_{a.lower()}"
            if have_gamma[a]:
                gamma[a].append(_num(f"{where}: {key}", r.get(key)))
        if have_resp:
            resp.append(_num(f"{where}: response", r.get("response")))
    f = np.asarray(fn)
    d = np.diff(f)
    if (d <= 0).any():
        i = int(np.argmax(d <= 0)) + 1
        raise InputError(f"mode {i + 1}: fn_hz", float(f[i]),
                         f"must be strictly greater than the previous mode's {f[i - 1]:g} Hz "
                         "(list modes in increasing frequency)")
    if have_resp and not unit:
        raise InputError("response_unit", None, "the response column needs a unit "
                         "('# response_unit: MPa' in the file, or declared)")
    return ModalTable(
        fn_hz=f,
        zeta=np.asarray(zeta),
        meff_kg=MappingProxyType({a: np.asarray(meff[a]) for a in AXES if have_meff[a]}),
        participation=MappingProxyType({a: np.asarray(gamma[a]) for a in AXES if have_gamma[a]}),
        response=np.asarray(resp) if have_resp else None,
        response_unit=unit if have_resp else "",
        source=filename,
        metadata=MappingProxyType({"columns": list(columns)}),
    )
