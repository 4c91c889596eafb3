"""Numbers and derivation steps as engineers write them, the same in every interface.

The web pages, the PDF documents and the CLI print a level's steps and numbers through
these functions, so "+7.94 dB" or "474 h" reads the same everywhere:

- numbers to 4 significant figures (``number``), without exponent between 1e-3 and 1e6;
- durations in s, min or h as fits (``duration``: "45 s", "30 min", "474 h");
- frequencies in Hz or kHz (``frequency``: "20.5 Hz", "2.05 kHz");
- decibels with their sign and 2 decimals (``decibels``: "+3.00 dB", "-0.31 dB");
- counts with their noun in the right number (``count``: "1 natural frequency").
"""

from __future__ import annotations

import math
from typing import Any

# A derivation step (qualplan.planning.results.Step); not imported, since results prints
# its verdict reasons with the words of this module.
Step = Any

SIGNIFICANT = 4

#: The caution every exported table and JSON carries (a lab types the table into its
#: controller; the responsible engineer's approval comes first).
CAUTION = ("CAUTION: a responsible engineer must review and approve this level before use; "
           "local standards, contracts and licensed engineering practice govern.")

#: A level's kind in words ("time history", not "time_history").
KIND_WORDS = {"random": "random", "sine": "sine", "shock": "shock",
              "time_history": "time history", "shock_srs": "shock SRS"}


#: How a level combines its inputs, in words (a recipe's ``combination``).
COMBINATION_WORDS = {"envelope": "maximum envelope", "p95_50": "P95/50",
                     "fds_equivalent": "FDS-equivalent random"}


def combination(name: str | None) -> str:
    """A recipe's combination in words: "P95/50" for ``p95_50``."""
    if name is None:
        return "-"
    name = str(getattr(name, "value", name))
    return COMBINATION_WORDS.get(name, name.replace("_", " "))


def kind(name: str | None) -> str:
    """A kind in words: "time history" for ``time_history``; unknown names with spaces."""
    if name is None:
        return "-"
    name = str(getattr(name, "value", name))
    return KIND_WORDS.get(name, name.replace("_", " "))


def number(value: float | int | None, digits: int = SIGNIFICANT) -> str:
    """A number to `digits` significant figures: 0.04965, 1706, 6.786, 1.6e-85."""
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    x = float(value)
    if not math.isfinite(x):
        return str(x)
    if x == 0:
        return "0"
    if 1e-3 <= abs(x) < 1e6:
        places = digits - 1 - math.floor(math.log10(abs(x)))
        if places < 0:  # 1706 to 2 figures is 1700, not 1706
            return str(int(round(x, places)))
        text = f"{round(x, places):.{places}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        return text
    return f"{x:.{digits - 1}e}".replace("e-0", "e-").replace("e+0", "e").replace("e+", "e")


#: Each requirement status with a symbol, so it reads without colour (web, PDF, CLI).
STATUS_SYMBOLS = {"verified": "✓", "waived": "⊘", "failed": "✗", "stale": "⟳", "open": "○"}


def status(name: str | None) -> str:
    """A status as symbol and word: "✓ verified", "⊘ waived", "✗ failed"."""
    if name is None:
        return "-"
    name = str(getattr(name, "value", name))
    symbol = STATUS_SYMBOLS.get(name)
    return f"{symbol} {name}" if symbol else name


def duration(seconds: float | None) -> str:
    """A duration in s below 2 min, min below 2 h, h above: "45 s", "30 min", "474 h"."""
    if seconds is None:
        return "-"
    s = float(seconds)
    if abs(s) < 120:
        return f"{number(s)} s"
    if abs(s) < 7200:
        return f"{number(s / 60)} min"
    return f"{number(s / 3600)} h"


def frequency(hz: float | None) -> str:
    """A frequency in Hz below 1 kHz, in kHz above: "20.5 Hz", "2.05 kHz"."""
    if hz is None:
        return "-"
    f = float(hz)
    return f"{number(f / 1000)} kHz" if abs(f) >= 1000 else f"{number(f)} Hz"


def decibels(db: float | None, against: float | None = None) -> str:
    """A level difference with its sign and 2 decimals: "+7.94 dB", "-0.31 dB".

    A margin printed beside the value it is judged against (``against``, dB) gets as many
    decimals as it needs (up to 6) to show on which side of it it lies: a margin of
    -0.0004 dB against a required 0 dB reads "-0.0004 dB", not "-0.00 dB", and +2.9996 dB
    against a required +3 dB reads "+2.9996 dB". Without ``against``, a non-zero value
    never reads as a signed zero."""
    text = signed(db, against)
    return text if text == "-" else f"{text} dB"


def signed(value: float | None, against: float | None = None, decimals: int = 2) -> str:
    """A dB value, slope or margin of safety with its sign and ``decimals`` decimals, or
    more when needed to tell it from ``against`` (see `decibels`): "+3.00", "-0.0004"."""
    if value is None or not math.isfinite(float(value)):
        return "-"
    return f"{float(value):+.{margin_decimals(value, against, decimals)}f}"


def margin_decimals(value: float, against: float | None = None, decimals: int = 2) -> int:
    """Decimals (from ``decimals`` up to 6) that tell ``value`` from ``against`` (or from 0
    when ``against`` is None) once both are rounded."""
    value = float(value)
    ref = 0.0 if against is None else float(against)
    if value == ref or not math.isfinite(ref):
        return decimals
    d = decimals
    while d < 6 and round(value, d) == round(ref, d):
        d += 1
    return d


def count(n: int, noun: str, plural: str | None = None) -> str:
    """ "1 natural frequency", "3 natural frequencies"."""
    if n == 1:
        return f"1 {noun}"
    if plural is None:
        plural = noun[:-1] + "ies" if noun.endswith("y") else noun + "s"
    return f"{n} {plural}"


def _inputs(step: Step) -> str:
    return ", ".join(step.inputs)


def step_sentence(step: Step, *, grade: str | None = None, policy: str | None = None) -> str:
    """One derivation step in words, e.g. "+3.00 dB qualification margin (policy
    tern-4-payload)" or "life 474 h compressed to 30 min: +7.94 dB (m = 7.5, ...)"."""
    v: dict[str, Any] = step.values
    what = step.step
    basis = f"policy {policy}" if policy else (step.basis or "")
    if what == "maximum envelope":
        return f"maximum envelope of {_inputs(step)}" if step.inputs else "maximum envelope"
    if what == "P95/50":
        return (f"P95/50 of {count(int(v.get('n', 0)), 'spectrum', 'spectra')} "
                f"(k = {number(v.get('k_factor'))}; {step.method or 'normal tolerance limit'})")
    if what == "conservative simplification":
        text = (f"conservative simplification to at most "
                f"{count(int(v.get('max_breakpoints', 0)), 'breakpoint')}: "
                f"{decibels(v.get('excess_db', 0.0))} over the combined spectrum")
        if v.get("worst_local_excess_db") is not None:
            text += (f" (rms over frequency; at most {decibels(v['worst_local_excess_db'])} "
                     f"at one frequency, {frequency(v.get('worst_local_excess_at_hz'))})")
        return text
    if what == "SRS of the record":
        notes = v.get("accuracy_notes") or []
        return (f"maximax SRS of {_inputs(step)} (Q = {number(v.get('q'))}, "
                f"{frequency(v.get('f_lo_hz'))} to {frequency(v.get('f_hi_hz'))}, sample rate "
                f"{frequency(v.get('sample_rate_hz'))}; {step.method})"
                + "".join(f"; note: {n}" for n in notes))
    if what in ("margin", "analysis margin"):
        label = "analysis margin" if what == "analysis margin" else f"{grade or 'test'} margin"
        return f"{decibels(step.db)} {label}" + (f" ({basis})" if basis else "")
    if what == "time compression":
        life, test = v.get("life_s"), v.get("test_s")
        exponent = v.get("exponent")
        on = f" of {_inputs(step)}" if step.inputs else ""
        return (f"life{on} {duration(life)} compressed to {duration(test)}: "
                f"{decibels(step.db)} (m = {number(exponent)}"
                + (f", {_short_method(step.method)}" if step.method else "") + ")")
    if what == "minimum level":
        raised = "raised to" if v.get("raised") else "already above"
        return f"{raised} the policy's minimum level ({number(v.get('floor_grms'))} g rms)"
    if what == "factor":
        return f"x{number(v.get('factor'))} on the amplitude" + (f" ({basis})" if basis else "")
    if what == "FDS equivalence":
        errors = v.get("max_fds_error") or {}
        worst = max(errors.values()) if errors else None
        return (f"FDS equivalence of {_inputs(step)} in {duration(v.get('test_duration_s'))} "
                f"(Q = {number(v.get('q'))}, b = {', '.join(number(b) for b in v.get('b', []))}"
                f"; worst FDS error {number(worst)})")
    parts = [what]
    if step.inputs:
        parts.append(f"of {_inputs(step)}")
    if step.db is not None:
        parts.append(decibels(step.db))
    text = " ".join(parts)
    extra = [f"{k.replace('_', ' ')} {number(x) if isinstance(x, int | float) else x}"
             for k, x in v.items()]
    if basis:
        extra.append(basis)
    return text + (f" ({'; '.join(extra)})" if extra else "")


def _short_method(method: str) -> str:
    """The method's source, e.g. "MIL-STD-810H 514.8 Annex A" out of its long name."""
    if "(" in method and method.endswith(")"):
        return method[method.rindex("(") + 1:-1].replace("Method ", "")
    return method
