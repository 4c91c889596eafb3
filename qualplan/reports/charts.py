"""Vector charts (SVG) of test levels and coverage, with matplotlib's object API.

No pyplot state: each chart is its own ``Figure`` saved as SVG with text kept as text
(small files, selectable in the PDF) and fixed ids and no date, so the same content
gives byte-identical SVG.
"""

from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
from matplotlib import rc_context  # noqa: E402
from matplotlib.collections import LineCollection  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, NullLocator  # noqa: E402

from qualplan.planning import results, wording  # noqa: E402
from qualplan.planning.documents import CoverageData, Curve, LevelSection  # noqa: E402

WIDTH_IN, HEIGHT_IN = 6.4, 3.5
NOMINAL = "#1f3b73"
BAND = "#b03a2e"
LIMIT = "#7f7f7f"
NOTCHED = "#1e7b34"
FORCE_NOTCHED = "#b8860b"
RC = {
    "svg.fonttype": "none",
    "svg.hashsalt": "qualplan",
    "font.family": "DejaVu Sans",
    "font.size": 8.5,
    "axes.grid": False,
    "axes.linewidth": 0.7,
    "lines.linewidth": 1.4,
    "legend.fontsize": 7.5,
    "legend.frameon": False,
}


def _plain(x, _pos=None) -> str:
    return f"{x:g}"


def _decades(ax, *, y: bool = True) -> None:
    """Log axes labelled at every decade (plain numbers, e.g. 10, 100, 1000).

    Minor ticks are off; :func:`_grid` draws the 1-9 x decade grid as two line
    collections (two SVG paths instead of one element per line: faster to print).
    """
    ax.grid(False)
    ax.xaxis.set_major_locator(LogLocator(base=10.0))
    ax.xaxis.set_major_formatter(FuncFormatter(_plain))
    ax.xaxis.set_minor_locator(NullLocator())
    if y:
        ax.yaxis.set_major_locator(LogLocator(base=10.0))
        ax.yaxis.set_minor_locator(NullLocator())


def tick_labels(values) -> list[str]:
    """Labels of one axis's ticks in one format: plain numbers (wording.number) when every
    tick lies in [0.001, 100000), else powers of ten for them all ("10^-4" in mathtext,
    "2×10^-4" between decades); never a mix of 0.005, 10^-3 and 5e-4 on one axis."""
    vals = [float(v) for v in values]
    if all(1e-3 <= abs(v) < 1e5 or v == 0 for v in vals):
        return [wording.number(v) for v in vals]
    out = []
    for v in vals:
        if v <= 0:
            out.append(wording.number(v))
            continue
        e = int(np.floor(np.log10(v) + 1e-9))
        k = v / 10.0 ** e
        mant = wording.number(k, 2)
        out.append(f"$10^{{{e}}}$" if mant == "1" else f"${mant}\\times10^{{{e}}}$")
    return out


def _one_format(ax) -> None:
    """Fix the tick labels of each log axis of `ax` to one format (see tick_labels)."""
    for axis, (lo, hi) in ((ax.xaxis, ax.get_xlim()), (ax.yaxis, ax.get_ylim())):
        if axis.get_scale() != "log":
            continue
        locs = [v for v in axis.get_majorticklocs() if min(lo, hi) <= v <= max(lo, hi)]
        if not locs:
            continue
        labels = dict(zip(locs, tick_labels(locs), strict=True))
        axis.set_major_locator(FixedLocator(locs))
        axis.set_major_formatter(FuncFormatter(lambda x, _p, m=labels: m.get(x, "")))


def _log_lines(lo: float, hi: float) -> tuple[list[float], list[float]]:
    """Decade (major) and 2..9 x decade (minor) positions inside [lo, hi]."""
    major, minor = [], []
    for e in range(int(np.floor(np.log10(lo))), int(np.ceil(np.log10(hi))) + 1):
        for k in range(1, 10):
            v = k * 10.0 ** e
            if lo <= v <= hi:
                (major if k == 1 else minor).append(v)
    return major, minor


def _grid(ax) -> None:
    """Grid lines of both axes, drawn once the limits are final."""
    segs_major, segs_minor = [], []
    x0, x1 = ax.get_xlim()
    major, minor = _log_lines(x0, x1) if ax.get_xscale() == "log" else (
        [v for v in ax.get_xticks() if x0 <= v <= x1], [])
    segs_major += [[(v, 0), (v, 1)] for v in major]
    segs_minor += [[(v, 0), (v, 1)] for v in minor]
    y0, y1 = ax.get_ylim()
    if ax.get_yscale() == "log":
        ymajor, yminor = _log_lines(y0, y1)
    else:
        ymajor, yminor = [v for v in ax.get_yticks() if y0 <= v <= y1], []
    xt = ax.get_xaxis_transform()
    yt = ax.get_yaxis_transform()
    for segs, color, width in ((segs_major, "#b8b8b8", 0.6), (segs_minor, "#e0e0e0", 0.4)):
        if segs:
            ax.add_collection(LineCollection(segs, colors=color, linewidths=width,
                                             transform=xt, zorder=0), autolim=False)
    for vals, color, width in ((ymajor, "#b8b8b8", 0.6), (yminor, "#e0e0e0", 0.4)):
        if vals:
            ax.add_collection(LineCollection([[(0, v), (1, v)] for v in vals], colors=color,
                                             linewidths=width, transform=yt, zorder=0),
                              autolim=False)
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    _one_format(ax)


def _narrow_y(ax) -> None:
    """Label 2x and 5x ticks as well when the y range spans less than ~1.5 decades."""
    lo, hi = ax.get_ylim()
    if lo > 0 and hi / lo < 30:
        ax.yaxis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 3.0, 5.0)))
    if lo > 0 and hi / lo < 3000:
        ax.yaxis.set_major_formatter(FuncFormatter(_plain))


def _legend_below(ax, n: int) -> None:
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.17), ncol=2 if n > 2 else n)


def _figure() -> Figure:
    """A figure with fixed margins (room for the legend below the axes)."""
    fig = Figure(figsize=(WIDTH_IN, HEIGHT_IN))
    fig.subplots_adjust(left=0.11, right=0.98, top=0.91, bottom=0.33)
    return fig


def _svg(fig: Figure) -> str:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": "qualplan"})
    return buf.getvalue()


def _loglog_interp(f: np.ndarray, v: np.ndarray, grid: np.ndarray) -> np.ndarray:
    return np.exp(np.interp(np.log(grid), np.log(f), np.log(v)))


def _dense(freq, values, n: int = 400):
    f = np.asarray(freq, float)
    v = np.asarray(values, float)
    grid = np.unique(np.concatenate([f, np.geomspace(f[0], f[-1], n)]))
    return grid, _loglog_interp(f, v, grid)


def level_chart(section: LevelSection) -> str:
    """Nominal level with its tolerance band (dashed) and the limit level before margins;
    a notched level also shows the notched input the lab runs: the response-limit notching
    and the input notched by the force limit, every stored point of each (the force limit
    itself, in N^2/Hz, is the level's second table)."""
    with rc_context(RC):
        return _svg(level_figure(section))


def level_figure(section: LevelSection) -> Figure:
    """The figure of :func:`level_chart` (its lines are what the chart draws)."""
    with rc_context(RC):
        fig = _figure()
        ax = fig.add_subplot()
        ax.set_xscale("log")
        ax.set_yscale("log")
        limit: Curve | None = section.derivation.limit
        if section.kind == "random":
            t = section.random
            f = [r.freq_hz for r in t.rows]
            a = [r.asd_g2_hz for r in t.rows]
            band = results.random_band(f, a, t.tolerance_db)
            ax.plot(f, a, color=NOMINAL, marker="o", ms=3,
                    label=f"test level, {t.grms:.3g} g rms")
            ax.plot(f, band.upper, color=BAND, ls="--", lw=1,
                    label=f"tolerance +/-{t.tolerance_db:g} dB")
            ax.plot(f, band.lower, color=BAND, ls="--", lw=1)
            ax.set_ylabel("ASD [g²/Hz]")
        elif section.kind == "shock":
            t = section.shock
            f = [r.freq_hz for r in t.rows]
            a = [r.accel_g for r in t.rows]
            ax.plot(f, a, color=NOMINAL, marker="o", ms=3, label=f"test SRS, Q = {t.q:g}")
            band = results.shock_band(f, a, t.lower_db, t.upper_db)
            ax.plot(f, band.upper, color=BAND, ls="--", lw=1,
                    label=f"tolerance {t.lower_db:+g} / {t.upper_db:+g} dB")
            ax.plot(f, band.lower, color=BAND, ls="--", lw=1)
            ax.set_ylabel("SRS peak acceleration [g]")
        else:
            t = section.sine
            f = [p.freq_hz for p in t.points]
            a = [p.accel_g for p in t.points]
            band = results.sine_band(f, a, t.tolerance_pct)
            ax.plot(f, a, color=NOMINAL, label=f"test level, peak {t.peak_accel_g:.3g} g")
            ax.plot(f, band.upper, color=BAND, ls="--", lw=1,
                    label=f"tolerance +/-{t.tolerance_pct:g} %")
            ax.plot(f, band.lower, color=BAND, ls="--", lw=1)
            ax.set_ylabel("acceleration [g peak]")
        if limit is not None and limit.freq_hz:
            lf, lv = limit.freq_hz, limit.values
            if section.kind != "sine" and len(lf) > 60:
                lf, lv = _thin(lf, lv)
            ax.plot(lf, lv, color=LIMIT, ls=":", lw=1.2, label="limit level (before margins)")
        nt = section.notching
        if nt is not None:
            ax.plot(nt.freq_hz, nt.notched, color=NOTCHED, lw=1.1,
                    label=f"notched input (response limit at {nt.location})")
        fl = section.force_limit
        if fl is not None and fl.notched_freq_hz:
            ax.plot(fl.notched_freq_hz, fl.notched_asd_g2_hz, color=FORCE_NOTCHED, lw=1.1,
                    label=f"input notched by the force limit (f0 = {_hz(fl.f0_hz)} Hz)")
        ax.set_xlabel("frequency [Hz]")
        _decades(ax)
        ax.set_title(f"{section.name} #{section.number}, axis {section.axis}", fontsize=9)
        _narrow_y(ax)
        _legend_below(ax, len(ax.get_lines()))
        _grid(ax)
        return fig


def _thin(f, v, n: int = 300):
    f = np.asarray(f, float)
    v = np.asarray(v, float)
    idx = np.unique(np.linspace(0, f.size - 1, n).round().astype(int))
    return f[idx], v[idx]


def _hz(value: float) -> str:
    """A frequency for a legend: 26.3, 885, 2000 (never 2e+03)."""
    return f"{value:.3g}" if value < 1000 else f"{value:.0f}"


def coverage_chart(coverage: CoverageData, title: str) -> str | None:
    """Test/life FDS ratio per b and ERS ratio [dB] against natural frequency."""
    if coverage is None or not coverage.fn_hz:
        return None
    fn = np.asarray(coverage.fn_hz, float)
    with rc_context(RC):
        fig = _figure()
        ax = fig.add_subplot()
        ax.set_xscale("log")
        styles = ["-", "-.", (0, (5, 1)), (0, (1, 1)), (0, (3, 1, 1, 1))]
        for i, item in enumerate(coverage.fds):
            y = np.array([np.nan if v is None else v for v in item.ratio_db], float)
            worst = (f", worst {item.worst_db:+.1f} dB at {_hz(item.worst_fn_hz)} Hz"
                     if item.worst_db is not None else "")
            ax.plot(fn, y, ls=styles[i % len(styles)], lw=1.2, label=f"FDS b = {item.b}{worst}")
        if coverage.ers is not None:
            e = coverage.ers
            y = np.array([np.nan if v is None else v for v in e.ratio_db], float)
            worst = (f", worst {e.worst_db:+.1f} dB at {_hz(e.worst_fn_hz)} Hz"
                     if e.worst_db is not None else "")
            ax.plot(fn, y, color="black", lw=1.6, label=f"ERS{worst}")
            ax.axhline(e.overtest_limit_db, color=BAND, ls=":", lw=1,
                       label=f"over-test flag {e.overtest_limit_db:+g} dB")
        ax.axhline(0.0, color=BAND, ls="--", lw=1.1, label="0 dB: test = life")
        ax.set_xlabel("natural frequency [Hz]")
        ax.set_ylabel("test / life [dB]")
        q = f", Q = {coverage.q:g}" if coverage.q else ""
        ax.set_title(f"{title}{q}", fontsize=9)
        _decades(ax, y=False)
        _legend_below(ax, 4)
        _grid(ax)
        return _svg(fig)


# --- overlay plots: the pages' plots as SVG files ------------------------------------------

#: Line colours of the overlay series (the pages' plot.js palette) and the dash per style.
PALETTE = ["#12436d", "#b3520b", "#1e7b5b", "#6a3d9a", "#8a1c2b"]
DASH = {"solid": "-", "dashed": "--", "dotted": ":"}


def _draw_series(ax, spec: dict) -> None:
    k = 0
    for item in spec["series"]:
        x = np.asarray(item["x"], float)
        y = np.array([np.nan if v is None else v for v in item["y"]], float)
        role = item.get("role", "main")
        if role == "band":
            color, lw = BAND, 1.0
        elif role == "other":
            color, lw = LIMIT, 1.2
        else:
            color, lw = PALETTE[k % len(PALETTE)], 1.4 if role == "main" else 1.1
            k += 1
        if spec.get("ylog", True):
            y = np.where(y > 0, y, np.nan)
        ax.plot(x, y, color=color, ls=DASH.get(item.get("style", "solid"), "-"), lw=lw,
                label=item["name"], zorder=3 if role == "main" else 2)
    ax.set_xscale("log")
    if spec.get("ylog", True):
        ax.set_yscale("log")
    ax.set_xlabel(f"{spec['xlabel']} [{spec['xunit']}]")
    ax.set_ylabel(f"{spec['ylabel']} [{spec['yunit']}]")
    _decades(ax, y=spec.get("ylog", True))
    if spec.get("ylog", True):
        _narrow_y(ax)
    ax.set_title(spec["title"], fontsize=9)


#: The line every downloaded plot carries under it (the pages and documents carry theirs).
PLOT_CAUTION = ("CAUTION: a responsible engineer must review these results before use; local "
                "standards, contracts and licensed engineering practice govern.")


def plot_chart(spec: dict, below: dict | None = None, *, caution: bool = True) -> str:
    """One overlay plot of the pages as SVG: `spec` is the pages' plot description
    (``{title, series: [{name, x, y, style, role}], xlabel, xunit, ylabel, yunit, ylog,
    note}``, x and y in the units it names), drawn log-log (or log-x, linear-y when
    ``ylog`` is false) with the same series, names and line styles; `below` is a second
    plot under it on the same frequency axis (e.g. the dB difference of two revisions).
    A file a user downloads carries :data:`PLOT_CAUTION` (``caution``); a chart inside a
    document that carries its own caution need not.
    """
    plots = [spec] + ([below] if below else [])
    rows = [(len(p["series"]) + 1) // 2 for p in plots]
    heights = [2.4 + 0.17 * r for r in rows]
    with rc_context(RC):
        fig = Figure(figsize=(WIDTH_IN, sum(heights) + (0.55 if caution else 0.3)),
                     layout="constrained")
        axes = fig.subplots(len(plots), 1, squeeze=False,
                            gridspec_kw={"height_ratios": heights})[:, 0]
        for ax, p in zip(axes, plots, strict=True):
            _draw_series(ax, p)
            ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.27 if p.get("note") else -0.2),
                      ncol=2 if len(p["series"]) > 1 else 1)
            if p.get("note"):  # under the axis label, above the legend
                ax.set_xlabel(f"{p['xlabel']} [{p['xunit']}]\n({p['note']})")
        for ax in axes:
            _grid(ax)
        if caution:  # a strip of 0.25 in under the plots, outside the layout
            total = sum(heights) + 0.55
            fig.get_layout_engine().set(rect=(0.0, 0.25 / total, 1.0, 1.0 - 0.25 / total))
            fig.text(0.5, 0.06 / total, PLOT_CAUTION, fontsize=6.2, color="#444444",
                     ha="center", va="bottom")
        return _svg(fig)


def record_plot(overlay) -> dict:
    """The plot description of a test record over its level and the tolerance band the
    verdict used (planning.evidence.RecordOverlay): the level, the band's upper and lower
    limits at the judged frequencies, for a shock rule with a share allowed outside the
    outer band, and the record (every point, drawn last). The pages draw it (plot.js) and
    :func:`record_chart` draws it as SVG, so both show the same lines."""
    band = overlay.band
    verdict = {"pass": "passed", "fail": "failed"}.get(overlay.verdict, overlay.verdict)
    record = f"record #{overlay.evidence_id} ({verdict})"
    series = [
        {"name": f"level {overlay.level}", "x": overlay.level_freq_hz,
         "y": overlay.level_values, "style": "solid", "role": "alt"},
        {"name": f"tolerance {band.label} (upper)", "x": band.freq_hz, "y": band.upper,
         "style": "dashed", "role": "band"},
        {"name": f"tolerance {band.label} (lower)", "x": band.freq_hz, "y": band.lower,
         "style": "dashed", "role": "band"},
    ]
    if band.outer_upper is not None:
        series += [
            {"name": "outer band (upper)", "x": band.freq_hz, "y": band.outer_upper,
             "style": "dotted", "role": "band"},
            {"name": "outer band (lower)", "x": band.freq_hz, "y": band.outer_lower,
             "style": "dotted", "role": "band"},
        ]
    # the record last: drawn over the level where it follows it
    series.append({"name": record, "x": overlay.record_freq_hz, "y": overlay.record_values,
                   "style": "solid", "role": "main"})
    quantity = overlay.quantity + (f", Q = {overlay.q:g}" if overlay.q else "")
    return {"title": f"{overlay.requirement_key}: record #{overlay.evidence_id} against "
                     f"{overlay.level}, axis {overlay.axis}",
            "series": series, "xlabel": "natural frequency" if overlay.kind == "shock"
            else "frequency", "xunit": "Hz", "ylabel": quantity, "yunit": overlay.unit,
            "ylog": True,
            "note": "tolerance band at the record's judged frequencies, as the verdict used it"}


def record_chart(overlay, *, caution: bool = True) -> str:
    """A test record over its level and tolerance band, as SVG (see :func:`record_plot`)."""
    return plot_chart(record_plot(overlay), caution=caution)
