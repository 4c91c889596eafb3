"""CSV and JSON of the same content the PDF shows.

CSV breakpoint tables are two columns (frequency, value) a test lab's controller can
load, with ``#`` comment lines carrying the document, level, units and tolerances;
numbers are written in Python's shortest round-trip form, so reading a table back
gives the stored floats exactly. ``qualplan env add --file T.csv --units g^2/Hz``
reads them too.
"""

from __future__ import annotations

import csv
import io
import json
import os
import unicodedata
from pathlib import Path

from qualplan.planning.documents import AuditContent, LevelSection, SpecificationContent


def _num(x: float | None) -> str:
    return "" if x is None else repr(float(x))


def _one_line(text) -> str:
    """A text on one line: control characters and line breaks become spaces, so a name
    can never end a ``#`` comment line and start a data row."""
    return "".join(" " if unicodedata.category(c) in ("Cc", "Zl", "Zp") else c
                   for c in str(text))


def _cell(text) -> str:
    """A text cell that a spreadsheet will not run as a formula: a leading ``= + - @``,
    tab or carriage return is escaped with a quote (OWASP, CSV injection)."""
    text = _one_line(text) if text is not None else ""
    return "'" + text if text[:1] in ("=", "+", "-", "@", "\t", "\r") else text


def section_csv(content: SpecificationContent, section: LevelSection) -> str:
    """Breakpoint table of one level: (Hz, g^2/Hz), (Hz, g SRS) or (Hz, g peak)."""
    buf = io.StringIO()
    head = [
        f"# {content.number} revision {content.revision}: {_one_line(content.title)}",
        f"# level {_one_line(section.name)} #{section.number}, axis {section.axis}, "
        f"{section.kind}, hash {section.level_hash}",
    ]
    w = csv.writer(buf, lineterminator="\n")
    if section.kind == "random":
        t = section.random
        head.append(f"# overall {t.grms:.4g} g rms; duration {t.duration_s:g} s per axis "
                    f"(-{t.duration_tolerance_pct:g} %); tolerance +/-{t.tolerance_db:g} dB "
                    f"on ASD, +/-{t.grms_tolerance_pct:g} % on g rms")
        buf.write("\n".join(head) + "\n")
        w.writerow(["freq_hz", "asd_g2_hz"])
        for r in t.rows:
            w.writerow([_num(r.freq_hz), _num(r.asd_g2_hz)])
    elif section.kind == "shock":
        t = section.shock
        head.append(f"# SRS maximax, Q = {t.q:g}; tolerance {t.lower_db:+g}/{t.upper_db:+g} dB; "
                    f"{t.shocks_per_direction} shocks per direction, directions {t.directions}, "
                    f"{t.shocks_per_axis} per axis")
        buf.write("\n".join(head) + "\n")
        w.writerow(["freq_hz", "accel_g"])
        for r in t.rows:
            w.writerow([_num(r.freq_hz), _num(r.accel_g)])
    else:
        t = section.sine
        head.append(f"# sine sweep {t.sweep_rate_oct_per_min:g} oct/min {t.direction}, "
                    f"{t.sweeps} sweep(s), {t.sweep_time_s:.1f} s; tolerance "
                    f"+/-{t.tolerance_pct:g} %; amplitude in g peak")
        buf.write("\n".join(head) + "\n")
        w.writerow(["freq_hz", "accel_g"])
        for p in t.points:
            w.writerow([_num(p.freq_hz), _num(p.accel_g)])
    return buf.getvalue()


def force_limit_csv(content: SpecificationContent, section: LevelSection) -> str:
    """Force limit of one random level (Hz, N^2/Hz) and its predicted notches."""
    t = section.force_limit
    buf = io.StringIO()
    buf.write("\n".join([
        f"# {content.number} revision {content.revision}: {content.title}",
        f"# force limit of level {section.name} #{section.number}, axis {section.axis}, "
        f"hash {section.level_hash}",
        f"# {t.method}; C^2 = {t.c2:g}, M0 = {t.mass_kg:g} kg, f0 = {t.f0_hz:g} Hz, "
        f"{t.rolloff_db_per_oct:.2f} dB/oct above f0; overall {t.force_rms_n:.4g} N rms",
    ]) + "\n")
    for n in t.notches:
        buf.write(f"# predicted notch {n.f_lo_hz:.4g}-{n.f_hi_hz:.4g} Hz, {n.depth_db:.2f} dB "
                  f"at {n.f_deepest_hz:.4g} Hz"
                  + (" (deeper than the policy maximum: approver's acceptance needed)"
                     if n.exceeds_policy else "") + "\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["freq_hz", "fsd_n2_hz"])
    for r in t.rows:
        w.writerow([_num(r.freq_hz), _num(r.fsd_n2_hz)])
    return buf.getvalue()


def audit_csv(content: AuditContent) -> str:
    buf = io.StringIO()
    buf.write(f"# {content.number} revision {content.revision}: {_one_line(content.title)}\n")
    buf.write(f"# {_one_line(content.verdict)}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["key", "product", "level", "method", "required_margin", "achieved_margin",
                "margin_unit", "status", "evidence", "reason", *content.margin_columns])
    for r in content.items:
        w.writerow([_cell(r.key), _cell(r.product), _cell(r.level or ""), _cell(r.method),
                    _num(r.required_margin), _num(r.achieved_margin), _cell(r.margin_unit),
                    _cell(r.status), _cell(r.evidence), _cell(r.reason),
                    *(_cell(c) for c in r.margin_cells)])
    return buf.getvalue()


def content_json(content: SpecificationContent | AuditContent) -> str:
    data = content.model_dump(mode="json")
    data["content_hash"] = content.content_hash()
    return json.dumps(data, indent=2, sort_keys=True) + "\n"


def section_file_stem(content: SpecificationContent, section: LevelSection) -> str:
    name = "".join(c if c.isalnum() else "-" for c in section.name).strip("-").lower()
    return f"{content.number}-r{content.revision}-{section.axis}-{section.kind}-{name}"


def _write_atomic(path: Path, text: str) -> None:
    """Write `text` to `path` whole or not at all: into a temporary file beside it, then
    renamed over it; on a full disk (or any OSError) the partial file is removed."""
    tmp = path.with_name(f".{path.name}.tmp")
    try:
        with open(tmp, "w", encoding="utf-8") as f:
            f.write(text)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except OSError:
        tmp.unlink(missing_ok=True)
        raise


def write_tables(content: SpecificationContent | AuditContent, out_dir: Path) -> list[Path]:
    """Write the JSON and the CSV tables of `content` into `out_dir`; return the paths."""
    out_dir = Path(out_dir)
    stem = f"{content.number}-r{content.revision}"
    paths = []
    p = out_dir / f"{stem}.json"
    _write_atomic(p, content_json(content))
    paths.append(p)
    if isinstance(content, SpecificationContent):
        for section in content.sections:
            p = out_dir / f"{section_file_stem(content, section)}.csv"
            _write_atomic(p, section_csv(content, section))
            paths.append(p)
            if getattr(section, "force_limit", None) is not None:
                p = out_dir / f"{section_file_stem(content, section)}-force-limit.csv"
                p.write_text(force_limit_csv(content, section), encoding="utf-8")
                paths.append(p)
    else:
        p = out_dir / f"{stem}.csv"
        _write_atomic(p, audit_csv(content))
        paths.append(p)
    return paths
