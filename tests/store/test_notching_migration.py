"""Migration 0013: the level_notchings table refuses UPDATE and DELETE through raw SQL
(triggers, SQLite and PostgreSQL alike); downgrading to 0009 removes it and keeps the
levels; upgrading brings it back empty."""

from __future__ import annotations

import pytest
from sqlalchemy import inspect, text
from sqlalchemy.exc import DBAPIError

from qualplan.store import migrate
from qualplan.store import models as m
from qualplan.store.session import make_engine, make_sessionmaker


def test_level_notchings_append_only_and_downgrade(fresh_db_url):
    migrate.upgrade(fresh_db_url)
    engine = make_engine(fresh_db_url)
    with make_sessionmaker(engine)() as session:
        prog = m.Program(name="P", description="")
        session.add(prog)
        session.flush()
        unit = m.Product(program_id=prog.id, name="U", part_number="", description="")
        session.add(unit)
        session.flush()
        level = m.Level(product_id=unit.id, name="sine X", purpose=m.LevelPurpose.test,
                        grade=m.Grade.qualification, kind=m.EnvironmentKind.sine,
                        axis=m.Axis.X, recipe={}, result={}, input_hashes={},
                        level_hash="h", author="a")
        session.add(level)
        session.flush()
        session.add(m.LevelNotching(level_id=level.id, params={"location": "lid"},
                                    result={"notches": []}, level_hash="h", author="a"))
        session.commit()
    for sql in ("UPDATE level_notchings SET author = 'b'", "DELETE FROM level_notchings"):
        with pytest.raises(DBAPIError, match="immutable"):
            with engine.begin() as conn:
                conn.execute(text(sql))
    migrate.downgrade(fresh_db_url, "0009")
    engine.dispose()
    assert "level_notchings" not in inspect(engine).get_table_names()
    migrate.upgrade(fresh_db_url)
    engine.dispose()
    with engine.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM levels")).scalar() == 1
        assert conn.execute(text("SELECT count(*) FROM level_notchings")).scalar() == 0
    engine.dispose()
