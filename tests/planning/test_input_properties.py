"""Property tests of the input checks: any JSON-like value given as environment data, and
any value given to the numeric core's validators, is either refused with a clear error
(ValidationFailed / InputError naming a field) or accepted as a valid, finite object."""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from qualplan.dynamics import _validate as v
from qualplan.dynamics import psd
from qualplan.dynamics.errors import InputError
from qualplan.planning import envdata
from qualplan.planning.errors import ValidationFailed
from qualplan.planning.inputs import parse_number
from qualplan.store.models import EnvironmentKind

SETTINGS = settings(max_examples=150, deadline=None)

scalars = st.one_of(st.none(), st.booleans(), st.integers(-10**20, 10**20),
                    st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=5))
json_like = st.recursive(scalars, lambda inner: st.one_of(
    st.lists(inner, max_size=5), st.dictionaries(st.text(max_size=8), inner, max_size=5)),
    max_leaves=20)
keys = {
    EnvironmentKind.random: ["freq_hz", "asd_g2_hz", "duration_s"],
    EnvironmentKind.shock: ["freq_hz", "accel_g", "q", "count"],
    EnvironmentKind.sine: ["bands", "sweep"],
    EnvironmentKind.time_history: ["dt_s", "accel_g", "duration_s"],
}
numbers = st.lists(st.one_of(st.floats(allow_nan=True, allow_infinity=True),
                             st.integers(-5, 10**6)), min_size=0, max_size=6)
band = st.fixed_dictionaries({}, optional={
    "f_lo_hz": scalars | st.floats(1, 100), "f_hi_hz": scalars | st.floats(1, 3000),
    "quantity": st.sampled_from(["displacement", "velocity", "acceleration", "x"]),
    "amplitude": scalars | st.floats(1e-3, 100), "unit": st.sampled_from(["mm", "m", "g", "?"]),
    "measure": st.sampled_from(["peak", "peak_to_peak", "rms"])})


@st.composite
def data_for(draw, kind):
    out = {}
    for key in keys[kind]:
        if draw(st.booleans()):
            if key == "bands":
                out[key] = draw(st.lists(band, max_size=3) | json_like)
            elif key in ("freq_hz", "asd_g2_hz", "accel_g"):
                out[key] = draw(numbers | json_like)
            else:
                out[key] = draw(json_like)
    if draw(st.integers(0, 9)) == 0:
        out[draw(st.text(max_size=6))] = draw(json_like)
    return out


def _finite_tree(x) -> bool:
    if isinstance(x, float):
        return math.isfinite(x)
    if isinstance(x, list):
        return all(_finite_tree(i) for i in x)
    if isinstance(x, dict):
        return all(_finite_tree(i) for i in x.values())
    return True


@SETTINGS
@given(kind=st.sampled_from(list(EnvironmentKind)), data=st.data())
def test_any_environment_data_is_refused_clearly_or_stored_valid(kind, data):
    payload = data.draw(data_for(kind))
    try:
        spec, array = envdata.normalise(kind, payload)
    except ValidationFailed as exc:
        assert exc.field.startswith("data") and exc.rule
        return
    assert _finite_tree(spec)
    if array is not None:
        assert np.isfinite(array).all()
    envdata.summarise(kind, spec, array)  # a stored spec always summarises


@SETTINGS
@given(value=scalars | st.lists(scalars, max_size=4))
def test_core_validators(value):
    for check in (lambda x: v.positive_scalar("x", x), v.check_q,
                  lambda x: v.as_1d_float("x", x)):
        try:
            out = check(value)
        except InputError as exc:
            assert exc.field and exc.rule
        else:
            assert np.isfinite(out).all()


@SETTINGS
@given(f=numbers, a=numbers)
def test_psd_check(f, a):
    try:
        ff, aa = psd.check_psd(f, a)
    except InputError as exc:
        assert exc.field.startswith(("freq_hz", "asd_g2_hz")) and exc.rule
    else:
        assert (np.diff(ff) > 0).all() and (aa > 0).all() and np.isfinite(aa).all()


@SETTINGS
@given(text=st.text(max_size=12) | st.sampled_from(["2_000", "1e999", "nan", "0x10", "2e3"]))
def test_typed_numbers(text):
    try:
        x = parse_number("field", text)
    except ValidationFailed as exc:
        assert exc.field == "field"
    else:
        assert math.isfinite(x) and "_" not in text
