"""Environments down the product tree: mountings, transfer rules, transferred
environments, the environments that apply to a product, force limits and response-limit
notching of test levels."""

from __future__ import annotations

from fastapi import APIRouter
from pydantic import BaseModel, Field

from qualplan.api.deps import ActorDep, ReaderDep, SessionDep
from qualplan.planning import environments as envs
from qualplan.planning import notching, transfers
from qualplan.planning import schemas as s
from qualplan.planning.errors import NotFound

router = APIRouter(tags=["transfers"])


@router.get("/products/{product_id}/environments",
            response_model=list[transfers.EnvironmentOrigin])
def product_environments(product_id: int, session: SessionDep, _: ReaderDep):
    """Every environment that applies to the product, its parents' included: its own,
    transferred (through which mounting and rules, stale or current), inherited unchanged
    from a parent, and a parent's that a transfer replaced."""
    return transfers.environments_for(session, product_id)


@router.put("/products/{product_id}/mounting", response_model=transfers.MountingRead)
def put_mounting(product_id: int, cmd: transfers.MountingIn, session: SessionDep,
                 actor: ActorDep):
    """State the product's orientation in its parent (signed permutation or direction
    cosines); environments transferred with the former one become stale."""
    return transfers.set_mounting(session, actor, product_id, cmd)


@router.get("/transfer-rules", response_model=list[transfers.RuleRead])
def list_rules(program_id: int, session: SessionDep, _: ReaderDep):
    return transfers.list_rules(session, program_id)


@router.post("/transfer-rules", status_code=201, response_model=transfers.RuleRead)
def create_rule(cmd: transfers.RuleCreate, session: SessionDep, actor: ActorDep):
    """A zone transmissibility or a mass attenuation, with its basis and provenance."""
    return transfers.read_rule(session, transfers.create_rule(session, actor, cmd))


@router.post("/transfer-rules/{rule_id}/revisions", status_code=201,
             response_model=transfers.RuleRead)
def revise_rule(rule_id: int, cmd: transfers.RuleRevisionIn, session: SessionDep,
                actor: ActorDep):
    rev = transfers.revise_rule(session, actor, rule_id, cmd)
    return transfers.read_rule(session, rev.rule)


@router.post("/transferred-environments", status_code=201, response_model=s.RevisionRead)
def derive_transferred(cmd: transfers.TransferCreate, session: SessionDep, actor: ActorDep):
    """Derive (or re-derive) a transferred environment; answers its new revision."""
    rev = transfers.derive_transferred(session, actor, cmd)
    return envs.read_revision(rev, rev.environment.kind)


@router.post("/environments/{environment_id}/force-limit",
             response_model=transfers.ForceLimitRead)
def force_limit(environment_id: int, cmd: transfers.ForceLimitIn, session: SessionDep,
                _: ReaderDep):
    """NASA-HDBK-7004 semi-empirical force limit [N^2/Hz] of a random environment's
    latest revision, with the notches it predicts when the item's modes are given."""
    return transfers.force_limit(session, environment_id, cmd)


@router.post("/levels/{level_id}/force-limit", status_code=201,
             response_model=transfers.ForceLimitRead)
def set_level_force_limit(level_id: int, cmd: transfers.ForceLimitIn, session: SessionDep,
                          actor: ActorDep):
    """Set the force limit of a random test level: it becomes the second table of the
    level in the test-level specification and a CSV of its own for the lab."""
    row = transfers.set_level_force_limit(session, actor, level_id, cmd)
    return transfers.ForceLimitRead.model_validate(row.result)


class NotchAcceptance(BaseModel):
    rationale: str = Field(min_length=1)


@router.post("/levels/{level_id}/force-limit/acceptance", status_code=201,
             response_model=transfers.ForceLimitRead)
def accept_notches(level_id: int, cmd: NotchAcceptance, session: SessionDep, actor: ActorDep):
    """An approver accepts notches deeper than the policy's maximum (recorded with the
    level's force limit and in the event log)."""
    row = transfers.accept_notches(session, actor, level_id, cmd.rationale)
    return transfers.ForceLimitRead.model_validate(row.result)


@router.post("/levels/{level_id}/notching", status_code=201,
             response_model=notching.NotchingRead)
def set_notching(level_id: int, cmd: notching.NotchingIn, session: SessionDep, actor: ActorDep):
    """Notch a random or sine test level against a response limit at a control or monitor
    location, through a transmissibility (low-level survey or analysis): stored with the
    level and printed in its specification and its notched CSV table."""
    return notching.read_notching(session, notching.set_notching(session, actor, level_id, cmd))


@router.get("/levels/{level_id}/notching", response_model=notching.NotchingRead)
def get_notching(level_id: int, session: SessionDep, _: ReaderDep):
    """The level's newest response-limit notching (404 when it has none)."""
    out = notching.level_notching(session, level_id)
    if out is None:
        raise NotFound("response-limit notching of level", level_id)
    return out


@router.post("/levels/{level_id}/notching/acceptance", status_code=201,
             response_model=notching.NotchingRead)
def accept_notching(level_id: int, cmd: NotchAcceptance, session: SessionDep, actor: ActorDep):
    """An approver accepts response-limit notches deeper than allowed (recorded)."""
    return notching.read_notching(session, notching.accept_notching(session, actor, level_id,
                                                                    cmd.rationale))
