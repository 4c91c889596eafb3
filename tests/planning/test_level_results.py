"""The typed level result: old rows load, and the refactor changed no number.

`tests/fixtures/demo_levels_v1.json` holds every level of `qualplan demo` as the first
release stored it (result schema version 1: an untyped dict) and the hash of each demo
document's content without its timestamps. The typed result must load those rows, keep
every field they had, and the demo built today must give the same levels and documents.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from pydantic import TypeAdapter

from qualplan.planning import demo, levels, results
from qualplan.store import migrate
from qualplan.store import models as m
from qualplan.store.session import make_engine, make_sessionmaker, unit_of_work

FIXTURE = json.loads(
    (Path(__file__).parents[1] / "fixtures" / "demo_levels_v1.json").read_text())


def _legacy(dumped: dict) -> dict:
    """A stored result as version 1 spelled it: steps as flat dicts."""
    out = dict(dumped)
    out["steps"] = [{"step": st["step"], **dict(results.Step(**st).items())}
                    for st in dumped["steps"]]
    return out


def _same(old, new, path="result"):
    """Every key of the old value is in the new one with the same value (exact)."""
    if isinstance(old, dict):
        assert isinstance(new, dict), path
        for k, v in old.items():
            assert k in new, f"{path}.{k} is missing"
            _same(v, new[k], f"{path}.{k}")
    elif isinstance(old, list):
        assert isinstance(new, list) and len(old) == len(new), path
        for i, (a, b) in enumerate(zip(old, new, strict=True)):
            _same(a, b, f"{path}[{i}]")
    else:
        assert old == new, f"{path}: {old!r} != {new!r}"


@pytest.mark.parametrize("row", FIXTURE["levels"], ids=lambda r: f"{r['id']}-{r['name']}")
def test_version_1_rows_load_with_every_field(row):
    typed = results.load(row["kind"], row["result"])
    assert typed.kind == row["kind"] and typed.schema_version == results.SCHEMA_VERSION
    _same(row["result"], _legacy(results.dump(typed)))
    # The upgraded row carries the verdicts and the core's tolerance band.
    assert typed.verdicts.converged is True
    assert typed.tolerance_band is not None or row["purpose"] == "analysis"
    if typed.coverage is not None and typed.coverage.fn_hz:
        assert set(typed.verdicts.covers_life) == {
            *(f"FDS b = {b}" for b in typed.coverage.by_b), "ERS"}


def test_a_result_round_trips_through_its_json():
    row = FIXTURE["levels"][0]
    typed = results.load(row["kind"], row["result"])
    again = results.load(row["kind"], results.dump(typed))
    assert again == typed


def test_a_newer_schema_version_is_refused_in_words():
    row = dict(FIXTURE["levels"][0]["result"], schema_version=results.SCHEMA_VERSION + 1)
    with pytest.raises(ValueError, match="newer than this qualplan reads"):
        results.load("random", row)


def test_tolerance_bands_are_the_cores():
    # Closed form: +/-3 dB on an ASD is a factor 10^(+/-0.3); -3/+6 dB on an SRS is
    # 10^(-3/20) and 10^(6/20); +/-10 % on a sine amplitude is 0.9 and 1.1.
    rb = results.random_band([20, 2000], [0.01, 0.02], 3.0)
    assert np.allclose(rb.upper, np.array([0.01, 0.02]) * 10 ** 0.3, rtol=1e-15)
    assert np.allclose(rb.lower, np.array([0.01, 0.02]) * 10 ** -0.3, rtol=1e-15)
    sb = results.shock_band([100, 1000], [50, 500], -3.0, 6.0)
    assert np.allclose(sb.lower, [50 * 10 ** (-3 / 20), 500 * 10 ** (-3 / 20)], rtol=1e-12)
    assert np.allclose(sb.upper, [50 * 10 ** (6 / 20), 500 * 10 ** (6 / 20)], rtol=1e-12)
    nb = results.sine_band([5, 50], [1.0, 2.0], 10.0)
    assert np.allclose(nb.lower, [0.9, 1.8]) and np.allclose(nb.upper, [1.1, 2.2])


def test_the_api_schema_is_a_union_on_kind():
    schema = TypeAdapter(results.LevelResult).json_schema()
    assert schema["discriminator"]["propertyName"] == "kind"
    assert set(schema["discriminator"]["mapping"]) == {"random", "sine", "shock"}


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    from tests import dbutil

    db = dbutil.TestDatabase(tmp_path_factory.mktemp("demo"))
    url = db.create()
    migrate.upgrade(url)
    engine = make_engine(url)
    factory = make_sessionmaker(engine)
    with unit_of_work(factory) as session:
        summary = demo.build_demo(session)
    yield factory, summary
    engine.dispose()
    db.drop()


# The typed result was checked against the first release's demo, level by level and
# table by table (commit "Typed level result"); the demo has since changed on purpose
# (environments carried down the product tree, a modal summary, sine bands in mm), so the
# first release's rows are now checked for loading only (above and below).


def test_a_version_1_row_in_the_database_reads_as_typed(demo_db):
    """A level row written by the first release (no schema_version) reads through planning."""
    factory, summary = demo_db
    old = next(x for x in FIXTURE["levels"] if x["kind"] == "shock")
    with unit_of_work(factory) as session:
        template = levels.level_by_id(session, old["id"])
        row = m.Level(product_id=template.product_id, policy_id=template.policy_id,
                      name="first-release row", number=1, purpose=template.purpose,
                      grade=template.grade, kind=template.kind, axis=template.axis,
                      recipe=template.recipe, result=old["result"],
                      input_hashes=template.input_hashes, level_hash="0" * 64, author="eve")
        session.add(row)
        session.flush()
        session.expire(row)
        read = levels.read_level(session, levels.level_by_id(session, row.id))
        assert isinstance(read.result, results.ShockResult)
        assert read.result.accel_g == old["result"]["accel_g"]
        assert read.result.verdicts.controllable is None
        session.rollback()
