"""Numbers and steps in words: one format for the web, the PDF and the CLI."""

from __future__ import annotations

import math

import pytest

from qualplan.planning import wording as w
from qualplan.planning.results import Step


@pytest.mark.parametrize("value, text", [
    (0.04965, "0.04965"), (6.78612, "6.786"), (1706.4, "1706"), (2050.0, "2050"),
    (0.1818, "0.1818"), (1.6e-85, "1.600e-85"), (0.0001234, "1.234e-4"), (0.0, "0"),
    (12, "12"), (-3.0103, "-3.01"), (None, "-"),
])
def test_numbers_to_four_significant_figures(value, text):
    # 4 significant figures, no exponent between 1e-3 and 1e6 (common practice).
    assert w.number(value) == text


def test_times_frequencies_decibels_and_counts_as_engineers_write_them():
    assert w.duration(1_706_400) == "474 h" and w.duration(1800) == "30 min"
    assert w.duration(45) == "45 s" and w.duration(5400) == "90 min"
    assert w.frequency(20.5) == "20.5 Hz" and w.frequency(2050) == "2.05 kHz"
    assert w.decibels(7.938155) == "+7.94 dB" and w.decibels(-0.314) == "-0.31 dB"
    assert w.count(1, "natural frequency") == "1 natural frequency"
    assert w.count(3, "natural frequency") == "3 natural frequencies"
    assert w.count(2, "spectrum", "spectra") == "2 spectra"


def test_a_time_compression_step_in_words():
    # Inverse power law, MIL-STD-810H Method 514.8 Annex A: 474 h into 30 min with m = 7.5
    # raises the ASD by 10 log10((1706400 / 1800)^(2 / 7.5)) = 7.938 dB (closed form).
    db = 10 * math.log10((1_706_400 / 1800) ** (2 / 7.5))
    st = Step(step="time compression", db=db,
              values={"life_s": 1_706_400.0, "test_s": 1800.0, "exponent": 7.5},
              method="inverse power law (MIL-STD-810H Method 514.8 Annex A)")
    assert w.step_sentence(st) == ("life 474 h compressed to 30 min: +7.94 dB "
                                   "(m = 7.5, MIL-STD-810H 514.8 Annex A)")


def test_a_margin_step_names_grade_and_policy():
    st = Step(step="margin", db=3.0, basis="program test plan")
    assert w.step_sentence(st, grade="qualification", policy="tern-4-payload") == (
        "+3.00 dB qualification margin (policy tern-4-payload)")
    assert w.step_sentence(st) == "+3.00 dB test margin (program test plan)"


def test_a_step_of_an_unknown_kind_still_reads_without_raw_keys_in_brackets_only():
    st = Step(step="notch", inputs=["survey Z r2"], db=-6.0, values={"depth_db": 6.0})
    assert w.step_sentence(st) == "notch of survey Z r2 -6.00 dB (depth db 6)"


def test_a_combination_reads_as_words():
    # the recipe keys of schemas.LevelRecipe.combination, as a document prints them
    assert w.combination("p95_50") == "P95/50"
    assert w.combination("envelope") == "maximum envelope"
    assert w.combination("fds_equivalent") == "FDS-equivalent random"
    assert w.combination("some_new_rule") == "some new rule" and w.combination(None) == "-"


@pytest.mark.parametrize("value, against, text", [
    # A margin beside its requirement shows on which side it lies (common practice: a
    # verdict that reads "-0.00 dB does not cover" is not auditable).
    (-0.0004, 0.0, "-0.0004 dB"), (2.9996, 3.0, "+2.9996 dB"), (3.004, 3.0, "+3.004 dB"),
    (-0.314, 0.0, "-0.31 dB"), (0.0, 0.0, "+0.00 dB"), (-2e-9, 0.0, "-0.000000 dB"),
    (-0.001, None, "-0.001 dB"), (6.0, 6.0, "+6.00 dB"),
])
def test_a_margin_gets_the_decimals_that_tell_it_from_its_requirement(value, against, text):
    assert w.decibels(value, against) == text


def test_a_coverage_shortfall_a_hair_under_zero_reads_with_its_digits():
    from qualplan.planning.results import Coverage, FdsCoverage, covers_life

    item = FdsCoverage(test_fds=[1.0], life_fds=[1.0001], fds_ratio_db=[-0.00043],
                       fds_level_db=[-0.00043], required_db=0.0, worst_fn_hz=21.6,
                       worst_db=-0.00043, passed=False)
    cov = Coverage(fn_hz=[21.6], b=[4.0], by_b={"4": item}, passed=False)
    ok, reasons = covers_life(cov)
    assert ok == {"FDS b = 4": False}
    assert reasons == ["does not cover the life's fatigue: FDS -0.0004 dB at 21.6 Hz, b = 4 "
                       "(required +0 dB)"]
