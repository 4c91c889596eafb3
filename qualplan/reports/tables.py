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
import unicodedata
from pathlib import Path

from qualplan.planning.documents import AuditContent, LevelSection, SpecificationContent
from qualplan.reports.files import write_atomic


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
    nt = getattr(section, "notching", None)
    if nt is not None:
        head.append(f"# NOTCHED against a response limit at {_one_line(nt.location)}: the lab "
                    "runs the notched input of the -notched.csv table")
        for n in nt.notches:
            head.append(f"# notch {n.f_lo_hz:.4g}-{n.f_hi_hz:.4g} Hz, {n.depth_db:.2f} dB at "
                        f"{n.f_deepest_hz:.4g} Hz, {n.width_oct:.3g} oct wide")
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


def notching_csv(content: SpecificationContent, section: LevelSection) -> str:
    """Response-limit notched input of one level: (Hz, level, notched), g^2/Hz or g peak."""
    t = section.notching
    unit = "g2_hz" if section.kind == "random" else "g"
    buf = io.StringIO()
    buf.write("\n".join([
        f"# {content.number} revision {content.revision}: {_one_line(content.title)}",
        f"# response-limit notching {t.notching_id} of level {_one_line(section.name)} "
        f"#{section.number}, axis {section.axis}, hash {section.level_hash}",
        f"# {t.method}",
        f"# location {_one_line(t.location)}; limit {_one_line(t.limit)}; transmissibility "
        f"from {t.transmissibility_source}"
        + (f" ({_one_line(t.transmissibility_note)})" if t.transmissibility_note else ""),
    ]) + "\n")
    for n in t.notches:
        buf.write(f"# notch {n.f_lo_hz:.4g}-{n.f_hi_hz:.4g} Hz, {n.depth_db:.2f} dB at "
                  f"{n.f_deepest_hz:.4g} Hz, {n.width_oct:.3g} oct"
                  + (" (deeper than allowed: " + (f"accepted by {_one_line(t.accepted_by)})"
                                                   if t.accepted_by else
                                                   "approver's acceptance needed)")
                     if n.exceeds_policy else "") + "\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["freq_hz", f"level_{unit}", f"notched_{unit}"])
    for f, a, v in zip(t.freq_hz, t.original, t.notched, strict=True):
        w.writerow([_num(f), _num(a), _num(v)])
    return buf.getvalue()


def audit_csv(content: AuditContent) -> str:
    buf = io.StringIO()
    buf.write(f"# {content.number} revision {content.revision}: {_one_line(content.title)}\n")
    buf.write(f"# {_one_line(content.verdict)}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["key", "product", "level", "method", "required_margin", "achieved_margin",
                "margin_unit", "status", "evidence", "reason"])
    for r in content.items:
        w.writerow([_cell(r.key), _cell(r.product), _cell(r.level or ""), _cell(r.method),
                    _num(r.required_margin), _num(r.achieved_margin), _cell(r.margin_unit),
                    _cell(r.status), _cell(r.evidence), _cell(r.reason)])
    return buf.getvalue()


def content_json(content: SpecificationContent | AuditContent) -> str:
    data = content.model_dump(mode="json")
    data["content_hash"] = content.content_hash()
    return json.dumps(data, indent=2, sort_keys=True) + "\n"


def file_stem(content) -> str:
    """``NUMBER-rN`` of an issued revision, ``NUMBER-preview`` of a preview (no revision)."""
    if getattr(content, "preview", False):
        return f"{content.number}-preview"
    return f"{content.number}-r{content.revision}"


def section_file_stem(content: SpecificationContent, section: LevelSection) -> str:
    name = "".join(c if c.isalnum() else "-" for c in section.name).strip("-").lower()
    return f"{file_stem(content)}-{section.axis}-{section.kind}-{name}"


def _write_atomic(path: Path, text: str) -> None:
    """Write `text` to `path` whole or not at all (:func:`qualplan.reports.files.write_atomic`)."""
    write_atomic(path, text)


def write_tables(content: SpecificationContent | AuditContent, out_dir: Path) -> list[Path]:
    """Write the JSON and the CSV tables of `content` into `out_dir`; return the paths."""
    out_dir = Path(out_dir)
    stem = file_stem(content)
    paths = []
    p = out_dir / f"{stem}.json"
    _write_atomic(p, content_json(content))
    paths.append(p)
    if isinstance(content, SpecificationContent):
        for section in content.sections:
            p = out_dir / f"{section_file_stem(content, section)}.csv"
            _write_atomic(p, section_csv(content, section))
            paths.append(p)
            if getattr(section, "notching", None) is not None:
                p = out_dir / f"{section_file_stem(content, section)}-notched.csv"
                _write_atomic(p, notching_csv(content, section))
                paths.append(p)
            if getattr(section, "force_limit", None) is not None:
                p = out_dir / f"{section_file_stem(content, section)}-force-limit.csv"
                _write_atomic(p, force_limit_csv(content, section))
                paths.append(p)
    else:
        p = out_dir / f"{stem}.csv"
        _write_atomic(p, audit_csv(content))
        paths.append(p)
    return paths
