"""Plot data for the pages: series of (x, y) with names, units and line styles.

The browser draws them (``static/plot.js``); here we only choose what to show. Values
come from planning (envdata.curve and the typed level results, tolerance band included);
nothing is computed twice.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from qualplan.planning import envdata, environments
from qualplan.planning.schemas import EnvironmentKind
from qualplan.reports import charts

K = EnvironmentKind
QUANTITY = {
    K.random: ("ASD", "g²/Hz"),
    K.shock: ("SRS", "g"),
    K.sine: ("acceleration", "g peak"),
}


def _series(name: str, x, y, style: str = "solid", role: str = "main") -> dict[str, Any]:
    xs = [float(v) for v in x]
    ys = [None if v is None or not np.isfinite(v) else float(v) for v in y]
    return {"name": name, "x": xs, "y": ys, "style": style, "role": role}


def plot(title: str, series: list, *, xlabel: str, xunit: str, ylabel: str, yunit: str,
         ylog: bool = True, note: str = "") -> dict[str, Any]:
    return {"title": title, "series": series, "xlabel": xlabel, "xunit": xunit,
            "ylabel": ylabel, "yunit": yunit, "ylog": ylog, "note": note}


def revision_xy(kind: K, spec: dict, data) -> tuple[list[float], list[float]] | None:
    """The curve of a revision: breakpoints (PSD, SRS are straight in log-log), or a grid
    (sine bands of constant displacement are curved in acceleration)."""
    if kind is K.random:
        return spec["freq_hz"], spec["asd_g2_hz"]
    if kind is K.shock:
        return spec["freq_hz"], spec["accel_g"]
    if kind is K.sine:
        lo, hi = spec["bands"][0]["f_lo_hz"], spec["bands"][-1]["f_hi_hz"]
        f = np.unique(np.concatenate(
            [np.geomspace(lo, hi, 160), [b["f_lo_hz"] for b in spec["bands"]], [hi]]))
        return f.tolist(), np.asarray(envdata.curve(kind, spec, data, f)).tolist()
    return None


def environment_plot(env, revs: list) -> dict[str, Any] | None:
    """The latest revision (solid) and up to two earlier ones (dashed)."""
    if env.kind not in QUANTITY:
        return None
    qty, unit = QUANTITY[env.kind]
    series = []
    for i, rev in enumerate(reversed(revs[-3:])):
        xy = revision_xy(env.kind, rev.spec, getattr(rev, "data", None))
        series.append(_series(f"revision {rev.number}", *xy,
                              style="solid" if i == 0 else "dotted",
                              role="main" if i == 0 else "other"))
    return plot(f"{env.name}: {qty}", series, xlabel="frequency", xunit="Hz",
                ylabel=qty, yunit=unit)


def difference_plot(env, ra, rb) -> dict[str, Any] | None:
    """Revision b against revision a [dB] over their common band (planning's curve), the
    plot under the overlay of the two revisions."""
    curve = environments.difference_curve(env.kind, ra, rb)
    if isinstance(curve, str):
        return None
    grid, diff, _, scale = curve
    return plot(f"{env.name}: revision {rb.number} against revision {ra.number}", [
        _series(f"r{rb.number} / r{ra.number}", grid.tolist(), diff.tolist()),
        _series("0 dB: unchanged", [float(grid[0]), float(grid[-1])], [0.0, 0.0], "dashed",
                "band"),
    ], xlabel="frequency", xunit="Hz", ylabel="difference", yunit="dB", ylog=False,
        note=f"dB = {scale:g} log10(b/a) on a 1/24-octave grid")


def record_plots(env, rev) -> list[dict[str, Any]]:
    """A time history seen as spectra: its maximax PSD and its maximax SRS (planning)."""
    if env.kind is not K.time_history or rev is None or getattr(rev, "data", None) is None:
        return []
    sp = envdata.record_spectra(rev.spec, rev.data)
    return [
        plot(f"{env.name} r{rev.number}: maximax PSD", [_series(
            f"revision {rev.number}", sp.psd_freq_hz, sp.psd_g2_hz)], xlabel="frequency",
            xunit="Hz", ylabel="ASD", yunit="g²/Hz", note=sp.psd_note),
        plot(f"{env.name} r{rev.number}: maximax SRS, Q = {sp.q:g}", [_series(
            f"revision {rev.number}", sp.srs_freq_hz, sp.srs_g)], xlabel="natural frequency",
            xunit="Hz", ylabel="SRS", yunit="g"),
    ]


def level_plot(level, inputs: list[dict[str, Any]] | None = None, *, notching=None,
               force_limit=None) -> dict[str, Any]:
    """The level with its tolerance band (dashed), the limit level it came from, each
    of its inputs compressed to the test duration (planning.levels.compressed_inputs)
    and, when the level is notched, the notched input the lab runs: the stored
    response-limit notching (planning.notching.NotchingRead) and the input notched by
    the force limit (planning.transfers.ForceLimitRead), both as stored.

    `level` is planning's LevelRead; the band is the one planning stored with the result.
    """
    r = level.result
    qty, unit = QUANTITY[level.kind]
    f, v = r.freq_hz, r.values
    series = [_series(f"{level.name} #{level.number}", f, v)]
    band = r.tolerance_band
    if band is not None:
        series.append(_series(f"tolerance {band.label} (upper)", band.freq_hz, band.upper,
                              "dashed", "band"))
        series.append(_series(f"tolerance {band.label} (lower)", band.freq_hz, band.lower,
                              "dashed", "band"))
    lim = r.limit
    series.append(_series("limit level (before margin)", lim.freq_hz,
                          lim.asd_g2_hz if level.kind is K.random else lim.accel_g,
                          "dotted", "other"))
    for item in inputs or []:
        series.append(_series(item["name"], item["freq_hz"], item["values"], "dotted", "alt"))
    notes = []
    if notching is not None:
        series.append(_series(f"notched input (response limit at {notching.location})",
                              notching.freq_hz, notching.notched, "solid", "notched"))
        notes.append(f"notched against a response limit: {len(notching.notches)} notch(es), "
                     f"deepest {max((n.depth_db for n in notching.notches), default=0):.3g} dB"
                     + (" (stale: made on an earlier level hash)" if notching.stale else ""))
    if force_limit is not None and force_limit.notched_freq_hz:
        series.append(_series(f"input notched by the force limit (C² = {force_limit.c2:g}, "
                              f"f0 = {force_limit.f0_hz:g} Hz)", force_limit.notched_freq_hz,
                              force_limit.notched_asd_g2_hz, "solid", "notched"))
        notes.append(f"force limited: {len(force_limit.notches)} predicted notch(es); the "
                     "force limit [N²/Hz] is the table below")
    return plot(f"{level.name} #{level.number}: {qty}", series, xlabel="frequency",
                xunit="Hz", ylabel=qty, yunit=unit, note="; ".join(notes))


def coverage_plots(level) -> list[dict[str, Any]]:
    """FDS ratio test/life per b [dB], ERS of test and life [g], from the level's coverage."""
    return coverage_plots_of(level.result.coverage)


def coverage_plots_of(cov, what: str = "test") -> list[dict[str, Any]]:
    """FDS ratio test/life per b [dB], ERS of test and life [g] with the over-test ceiling
    (the life's ERS raised by the policy's over-test limit), and the ERS ratio [dB], from a
    planning Coverage (of one level, or of an axis's test sequence: `what` names it)."""
    if cov is None or not cov.fn_hz:
        return []
    fn = cov.fn_hz
    out = []
    series = [
        _series(f"b = {b}", fn, d.fds_ratio_db, role="main" if i == 0 else "alt")
        for i, (b, d) in enumerate(cov.by_b.items())
    ]
    req = next(iter(cov.by_b.values())).required_db if cov.by_b else 0.0
    series.append(_series(f"required {req:+g} dB", [fn[0], fn[-1]], [req, req], "dashed", "band"))
    out.append(plot(f"FDS coverage: {what} / life", series, xlabel="natural frequency",
                    xunit="Hz", ylabel="FDS ratio", yunit="dB", ylog=False,
                    note="damage is relative: the material constant cancels in the ratio"))
    ers = cov.ers
    if ers is not None:
        ceiling = (np.asarray(ers.life_ers, float) * 10.0 ** (ers.overtest_limit_db / 20.0))
        out.append(plot(f"ERS coverage: {what} and life", [
            _series(f"{what} ERS", fn, ers.test_ers),
            _series("life ERS", fn, ers.life_ers, "dashed", "alt"),
            _series(f"over-test ceiling: life {ers.overtest_limit_db:+g} dB", fn,
                    ceiling.tolist(), "dotted", "band"),
        ], xlabel="natural frequency", xunit="Hz", ylabel="ERS", yunit="g",
            note=f"Q = {cov.q if cov.q is not None else 10:g}"))
        out.append(plot(f"ERS ratio: {what} / life", [
            _series("ERS ratio", fn, ers.ers_ratio_db),
            _series(f"required {ers.required_db:+g} dB", [fn[0], fn[-1]],
                    [ers.required_db] * 2, "dashed", "band"),
            _series(f"over-test limit {ers.overtest_limit_db:+g} dB", [fn[0], fn[-1]],
                    [ers.overtest_limit_db] * 2, "dotted", "band"),
        ], xlabel="natural frequency", xunit="Hz", ylabel="ERS ratio", yunit="dB", ylog=False))
    return out


def record_plot(overlay) -> dict[str, Any]:
    """A test record over its level and the band its verdict used (the same description
    the SVG file and the PDF draw: reports.charts.record_plot)."""
    return charts.record_plot(overlay)


def worst_margins(level) -> list[dict[str, Any]]:
    return worst_margins_of(level.result.coverage)


def worst_margins_of(cov) -> list[dict[str, Any]]:
    if cov is None:
        return []
    rows = []
    for b, d in cov.by_b.items():
        rows.append({"what": f"FDS, b = {b}", "fn_hz": d.worst_fn_hz, "margin_db": d.worst_db,
                     "required_db": d.required_db, "passed": d.passed})
    ers = cov.ers
    if ers is not None:
        rows.append({"what": "ERS", "fn_hz": ers.worst_fn_hz, "margin_db": ers.worst_db,
                     "required_db": ers.required_db, "passed": ers.passed})
    return rows
