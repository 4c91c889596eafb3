"""The product page shows where a unit's environments come from."""

from __future__ import annotations

from qualplan.planning import catalog, environments, transfers
from qualplan.planning import schemas as s
from qualplan.store import models as m
from qualplan.store.session import unit_of_work
from tests.web.conftest import SETUP


def test_product_page_lists_origins(browserless, users, world, factory):
    with unit_of_work(factory) as session:
        parent = catalog.get(session, m.Product, world.product_id, "product")
        child = catalog.create_product(session, SETUP, s.ProductCreate(
            program_id=world.program_id, name="board", parent_id=parent.id))
        env = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=parent.id, name="flight Z", kind=m.EnvironmentKind.random,
            axis=m.Axis.Z, data={"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.04, 0.04]}))
        other = environments.create_environment(session, SETUP, s.EnvironmentCreate(
            product_id=parent.id, name="flight X", kind=m.EnvironmentKind.random,
            axis=m.Axis.X, data={"freq_hz": [20.0, 2000.0], "asd_g2_hz": [0.02, 0.02]}))
        transfers.derive_transferred(session, SETUP, transfers.TransferCreate(
            product_id=child.id, name="flight Z (board)", axis=m.Axis.Z,
            parent_environment_ids=[env.id]))
        child_id, env_id, other_id = child.id, env.id, other.id
    html = browserless(users["viewer"]).get(f"/products/{child_id}").text
    assert "Where its environments come from" in html
    assert "transferred" in html and "replaced" in html and "inherited" in html
    assert f'href="/environments/{env_id}"' in html and f'href="/environments/{other_id}"' in html
    # a product with only its own environments shows no origin table
    assert "Where its environments come from" not in browserless(users["viewer"]).get(
        f"/products/{world.product_id}").text
