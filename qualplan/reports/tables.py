"""CSV and JSON of the same content the PDF shows.

One breakpoint-table format leaves qualplan, from documents, web downloads, the API
and ``qualplan level export`` alike (`breakpoint_csv`): ``#`` comment lines (document,
level, kind, axis, grade, units, tolerances, duration / sweeps / shocks, level hash,
STALE, caution), a header with the units in the names, values to 4 significant figures
(or a stated precision). ``qualplan env add --file T.csv --units g^2/Hz`` reads the
random and shock tables back. JSON exports carry a ``caution`` field.
"""

from __future__ import annotations

import csv
import io
import json
import unicodedata
from pathlib import Path

from qualplan.dynamics.errors import InputError
from qualplan.planning import wording
from qualplan.planning.documents import AuditContent, LevelSection, SpecificationContent
from qualplan.reports.files import write_atomic


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


def _sig(x: float | None, digits: int) -> str:
    """A table value to `digits` significant figures (wording.number), plain ASCII."""
    return "" if x is None else wording.number(float(x), digits)


def _stale_lines(section: LevelSection) -> list[str]:
    return [f"# STALE: {_one_line(r)}" for r in section.stale_reasons]


def breakpoint_csv(section: LevelSection, *, grade: str | None,
                   document: tuple[str, int] | None = None,
                   digits: int = wording.SIGNIFICANT) -> str:
    """The one breakpoint table of a level, as every interface exports it.

    ``#`` comment lines first (document and revision when the level is part of one,
    level, kind, axis, grade, units, tolerances, duration / sweeps / shocks, the level
    hash, STALE lines, the caution), then a header with the units in the column names:
    ``freq_hz,asd_g2_hz`` (random ASD, straight lines in log-log between breakpoints),
    ``freq_hz,accel_g`` (shock SRS), and for a sine level the bands the lab sets up,
    ``f_lo_hz,f_hi_hz,quantity,amplitude,unit`` (held displacement in mm peak-to-peak,
    then acceleration in g peak). Values are written to `digits` significant figures.
    """
    if not 1 <= int(digits) <= 17:
        raise InputError("digits", digits, "must be a whole number from 1 to 17")
    digits = int(digits)
    buf = io.StringIO()
    head = []
    if document is not None:
        head.append(f"# document {_one_line(document[0])} revision {document[1]}")
    else:
        head.append("# not part of an issued document")
    head.append(f"# level {_one_line(section.name)} #{section.number}; kind "
                f"{wording.kind(section.kind)}; axis {section.axis}; grade "
                f"{_one_line(grade) if grade else '-'}; policy {_one_line(section.policy)}")
    head.append(f"# level hash {section.level_hash}")
    w = csv.writer(buf, lineterminator="\n")
    n = lambda x: _sig(x, digits)  # noqa: E731
    nt = getattr(section, "notching", None)
    if nt is not None:
        head.append(f"# NOTCHED against a response limit at {_one_line(nt.location)}: the lab "
                    "runs the notched input of the -notched.csv table")
        for nch in nt.notches:
            head.append(f"# notch {nch.f_lo_hz:.4g}-{nch.f_hi_hz:.4g} Hz, {nch.depth_db:.2f} dB at "
                        f"{nch.f_deepest_hz:.4g} Hz, {nch.width_oct:.3g} oct wide")
    if section.kind == "random":
        t = section.random
        head += [
            "# units: frequency Hz, ASD g^2/Hz, straight lines in log-log between breakpoints",
            f"# overall {n(t.grms)} g rms; duration {wording.duration(t.duration_s)} per axis "
            f"(tolerance -{n(t.duration_tolerance_pct)} %)",
            f"# tolerances: +/-{n(t.tolerance_db)} dB on the ASD, "
            f"+/-{n(t.grms_tolerance_pct)} % on g rms",
        ]
        header = ["freq_hz", "asd_g2_hz"]
        rows = [[n(r.freq_hz), n(r.asd_g2_hz)] for r in t.rows]
    elif section.kind == "shock":
        t = section.shock
        head += [
            f"# units: natural frequency Hz, SRS maximax acceleration g peak, Q = {n(t.q)}",
            f"# tolerances: {wording.decibels(t.lower_db)} / {wording.decibels(t.upper_db)} "
            f"on the SRS, at least {n(100 * t.min_fraction_above_nominal)} % of the "
            "frequencies at or above nominal",
            f"# shocks: {t.shocks_per_direction} per direction, directions {t.directions}, "
            f"{t.shocks_per_axis} per axis",
        ]
        header = ["freq_hz", "accel_g"]
        rows = [[n(r.freq_hz), n(r.accel_g)] for r in t.rows]
    else:
        t = section.sine
        head += [
            f"# sweep: {n(t.sweep_rate_oct_per_min)} oct/min {_one_line(t.direction)}, "
            f"{wording.count(t.sweeps, 'sweep')}, {wording.duration(t.sweep_time_s)}",
            f"# tolerances: +/-{n(t.tolerance_pct)} % on the amplitude",
        ]
        bands = _lab_bands(t)
        if bands:
            head.append("# units: frequency Hz; held displacement mm peak-to-peak, "
                        "velocity m/s peak, acceleration g peak")
            header = ["f_lo_hz", "f_hi_hz", "quantity", "amplitude", "unit"]
            rows = [[n(lo), n(hi), q, n(a), u] for lo, hi, q, a, u in bands]
        else:
            head.append("# envelope of several inputs, no held bands: acceleration g peak "
                        "at each frequency Hz, straight lines in log-log between them")
            header = ["freq_hz", "accel_g"]
            rows = [[n(p.freq_hz), n(p.accel_g)] for p in t.points]
    head += _stale_lines(section)
    head.append(f"# {wording.CAUTION}")
    buf.write("\n".join(head) + "\n")
    w.writerow(header)
    w.writerows(rows)
    return buf.getvalue()


def _lab_bands(t) -> list[tuple[float, float, str, float, str]]:
    """The sine bands as a lab sets them up: displacement in mm peak-to-peak (a band
    stored as peak is doubled), velocity in m/s peak, acceleration in g peak."""
    out = []
    for b in t.bands:
        if b.quantity.startswith("displacement"):
            amp = b.amplitude * (1.0 if "peak-to-peak" in b.quantity else 2.0)
            out.append((b.f_lo_hz, b.f_hi_hz, "displacement_pk_pk", amp, "mm"))
        elif b.quantity == "velocity":
            out.append((b.f_lo_hz, b.f_hi_hz, "velocity_pk", b.amplitude, "m/s"))
        else:
            out.append((b.f_lo_hz, b.f_hi_hz, "acceleration_pk", b.amplitude, "g"))
    return out


def section_csv(content: SpecificationContent, section: LevelSection,
                digits: int = wording.SIGNIFICANT) -> str:
    """The breakpoint table of one level of a specification (see `breakpoint_csv`)."""
    return breakpoint_csv(section, grade=content.grade,
                          document=(content.number, content.revision), digits=digits)


def force_limit_csv(content: SpecificationContent, section: LevelSection,
                    digits: int = wording.SIGNIFICANT) -> str:
    """Force limit of one random level (Hz, N^2/Hz) and its predicted notches."""
    t = section.force_limit
    n = lambda x: _sig(x, digits)  # noqa: E731
    buf = io.StringIO()
    buf.write("\n".join([
        f"# document {_one_line(content.number)} revision {content.revision}",
        f"# force limit of level {_one_line(section.name)} #{section.number}; kind "
        f"{wording.kind(section.kind)}; axis {section.axis}; grade {content.grade}",
        f"# level hash {section.level_hash}",
        f"# {_one_line(t.method)}; C^2 = {n(t.c2)}, M0 = {n(t.mass_kg)} kg, "
        f"f0 = {wording.frequency(t.f0_hz)}, {wording.decibels(t.rolloff_db_per_oct)}/oct "
        f"above f0; overall {n(t.force_rms_n)} N rms",
        "# units: frequency Hz, force spectral density N^2/Hz",
    ]) + "\n")
    for notch in t.notches:
        buf.write(f"# predicted notch {n(notch.f_lo_hz)}-{n(notch.f_hi_hz)} Hz, "
                  f"{n(notch.depth_db)} dB deep at {wording.frequency(notch.f_deepest_hz)}"
                  + (" (deeper than the policy maximum: approver's acceptance needed)"
                     if notch.exceeds_policy else "") + "\n")
    buf.write("".join(x + "\n" for x in _stale_lines(section)))
    buf.write(f"# {wording.CAUTION}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["freq_hz", "fsd_n2_hz"])
    for r in t.rows:
        w.writerow([n(r.freq_hz), n(r.fsd_n2_hz)])
    return buf.getvalue()


def notching_csv(content: SpecificationContent, section: LevelSection,
                 digits: int = wording.SIGNIFICANT) -> str:
    """Response-limit notched input of one level: (Hz, level, notched), g^2/Hz or g peak,
    to `digits` significant figures."""
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
        f"# {wording.CAUTION}",
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
        w.writerow([_sig(f, digits), _sig(a, digits), _sig(v, digits)])
    return buf.getvalue()


def audit_csv(content: AuditContent, digits: int = wording.SIGNIFICANT) -> str:
    """The audit's items, one a row; margins to `digits` significant figures."""
    buf = io.StringIO()
    buf.write(f"# document {_one_line(content.number)} revision {content.revision}: "
              f"{_one_line(content.title)}\n")
    buf.write(f"# {_one_line(content.verdict)}\n")
    buf.write("# margins in margin_unit: dB for a test, MS (margin of safety) for an analysis\n")
    buf.write("# CAUTION: a responsible engineer must review these verdicts before release; "
              "local standards, contracts and licensed engineering practice govern.\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["key", "product", "level", "method", "required_margin", "achieved_margin",
                "margin_unit", "status", "evidence", "reason", *content.margin_columns])
    for r in content.items:
        w.writerow([_cell(r.key), _cell(r.product), _cell(r.level or ""), _cell(r.method),
                    _sig(r.required_margin, digits), _sig(r.achieved_margin, digits),
                    _cell(r.margin_unit), _cell(r.status), _cell(r.evidence),
                    _cell(r.reason),
                    *(_cell(c) for c in r.margin_cells)])
    return buf.getvalue()


def plain_csv(comments: list[str], header: list[str], rows, *,
              caution: str = wording.CAUTION, digits: int = wording.SIGNIFICANT) -> str:
    """Any other table that leaves qualplan, in the same form: ``#`` comment lines (each on
    one line), the caution, a header with units in the names, numbers to `digits`
    significant figures, text cells escaped against spreadsheet formulas."""
    buf = io.StringIO()
    for c in [*comments, caution]:
        buf.write(f"# {_one_line(c)}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([_cell(h) for h in header])
    for row in rows:
        w.writerow([_sig(x, digits) if isinstance(x, float) else
                    str(x) if isinstance(x, int) and not isinstance(x, bool) else
                    _cell("" if x is None else x) for x in row])
    return buf.getvalue()


def revision_csv(kind: str, name: str, number: int, spec: dict,
                 digits: int = wording.SIGNIFICANT) -> str | None:
    """The table of an environment revision (random ASD, shock SRS, sine bands), in the
    one format; None for a time history (no breakpoint table)."""
    comments = [f"environment {name} revision {number}; kind {wording.kind(kind)}"]
    if kind == "random":
        rows = list(zip(map(float, spec["freq_hz"]), map(float, spec["asd_g2_hz"]), strict=True))
        comments.append("units: frequency Hz, ASD g^2/Hz, straight lines in log-log")
        if spec.get("duration_s") is not None:
            comments.append(f"exposure {wording.duration(spec['duration_s'])}")
        return plain_csv(comments, ["freq_hz", "asd_g2_hz"], rows, digits=digits)
    if kind == "shock":
        rows = list(zip(map(float, spec["freq_hz"]), map(float, spec["accel_g"]), strict=True))
        comments.append("units: natural frequency Hz, SRS acceleration g peak"
                        + (f", Q = {wording.number(spec['q'])}" if spec.get("q") else ""))
        return plain_csv(comments, ["freq_hz", "accel_g"], rows, digits=digits)
    if kind == "sine":
        rows = []
        for b in spec["bands"]:
            q, amp = b["quantity"], float(b["amplitude"])
            if q == "displacement":
                amp *= 1000.0 * (1.0 if b.get("measure") == "peak_to_peak" else 2.0)
                rows.append((float(b["f_lo_hz"]), float(b["f_hi_hz"]), "displacement_pk_pk",
                             amp, "mm"))
            elif q == "velocity":
                rows.append((float(b["f_lo_hz"]), float(b["f_hi_hz"]), "velocity_pk", amp,
                             "m/s"))
            else:
                rows.append((float(b["f_lo_hz"]), float(b["f_hi_hz"]), "acceleration_pk", amp,
                             "g"))
        comments.append("units: frequency Hz; held displacement mm peak-to-peak, velocity "
                        "m/s peak, acceleration g peak")
        return plain_csv(comments, ["f_lo_hz", "f_hi_hz", "quantity", "amplitude", "unit"],
                         rows, digits=digits)
    return None


def content_json(content: SpecificationContent | AuditContent) -> str:
    data = content.model_dump(mode="json")
    data["content_hash"] = content.content_hash()
    data["caution"] = wording.CAUTION
    return json.dumps(data, indent=2, sort_keys=True) + "\n"


def file_stem(content) -> str:
    """``NUMBER-rN`` of an issued revision, ``NUMBER-preview`` of a preview (no revision)."""
    if getattr(content, "preview", False):
        return f"{content.number}-preview"
    return f"{content.number}-r{content.revision}"


def level_export_csv(export, digits: int = wording.SIGNIFICANT) -> str:
    """The breakpoint table of a level outside a document (planning.documents.LevelExport)."""
    return breakpoint_csv(export.section, grade=export.grade, digits=digits)


def level_file_stem(export) -> str:
    sec = export.section
    name = "".join(c if c.isalnum() else "-" for c in sec.name).strip("-").lower() or "level"
    return f"{name}-{sec.number}-{sec.axis}-{sec.kind}"


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
