"""Margin policies: named, editable rule sets per grade and kind, with shipped defaults.

Two default sets ship with qualplan. Their values come from the standards named
beside each; the values were taken from memory of those documents (see
docs/methods/margins.md) and must be checked against the printed editions a
program is contracted to before use.
"""

from __future__ import annotations

import re

from sqlalchemy import select
from sqlalchemy.orm import Session

from qualplan.planning import schemas as s
from qualplan.planning.access import Actor, record, require
from qualplan.planning.catalog import _add_unique, check_version, get, name_key, ref_id
from qualplan.planning.errors import NotFound, ValidationFailed
from qualplan.planning.inputs import check_line, text_rule
from qualplan.store import models as m
from qualplan.store.repositories import PolicyRepository
from qualplan.store.types import utcnow

Q, A, P = m.Grade.qualification, m.Grade.acceptance, m.Grade.protoflight

#: NASA-STD-7001B / GSFC-STD-7000B minimum workmanship random vibration (6.8 g rms),
#: 20-80 Hz +3 dB/oct, 80-500 Hz 0.04 g^2/Hz, 500-2000 Hz -3 dB/oct (from memory).
WORKMANSHIP = {"freq_hz": [20.0, 80.0, 500.0, 2000.0], "asd_g2_hz": [0.01, 0.04, 0.04, 0.01]}
#: The same spectrum +3 dB (x 2 in PSD, 9.6 g rms): the qualification workmanship level.
WORKMANSHIP_QUAL = {
    "freq_hz": WORKMANSHIP["freq_hz"],
    "asd_g2_hz": [2 * a for a in WORKMANSHIP["asd_g2_hz"]],
}

GEVS = "GSFC-STD-7000B (GEVS) Table 2.4-1 and section 2.4.2 (values from memory; verify)"
MIL810 = "MIL-STD-810H Methods 514.8 and 516.8 (values from memory; verify)"

SPACEFLIGHT_DEFAULTS = s.PolicyRules(
    random={
        Q: s.RandomRule(
            margin_db=3.0,
            duration_s=120.0,
            minimum_profile=WORKMANSHIP_QUAL,
            basis=f"{GEVS}: qualification = limit + 3 dB, 2 min per axis; "
            "not below the workmanship level + 3 dB",
        ),
        P: s.RandomRule(
            margin_db=3.0,
            duration_s=60.0,
            minimum_profile=WORKMANSHIP_QUAL,
            basis=f"{GEVS}: protoflight = limit + 3 dB, 1 min per axis",
        ),
        A: s.RandomRule(
            margin_db=0.0,
            duration_s=60.0,
            minimum_profile=WORKMANSHIP,
            basis=f"{GEVS}: acceptance = limit level, 1 min per axis; not below "
            "NASA-STD-7001B workmanship (6.8 g rms)",
        ),
    },
    sine={
        Q: s.SineRule(
            factor=1.25,
            sweep_rate_oct_per_min=2.0,
            basis=f"{GEVS}: qualification 1.25 x limit, 2 oct/min",
        ),
        P: s.SineRule(
            factor=1.25,
            sweep_rate_oct_per_min=4.0,
            basis=f"{GEVS}: protoflight 1.25 x limit, 4 oct/min",
        ),
        A: s.SineRule(
            factor=1.0,
            sweep_rate_oct_per_min=4.0,
            basis=f"{GEVS}: acceptance 1.0 x limit, 4 oct/min",
        ),
    },
    shock={
        Q: s.ShockRule(
            margin_db=3.0,
            shocks_per_direction=2,
            lower_db=-6.0,
            upper_db=6.0,
            min_fraction_above_nominal=0.3,
            basis=f"{GEVS}: simulated shock qualification = limit + 3 dB, 2 per axis",
        ),
        P: s.ShockRule(
            margin_db=3.0,
            shocks_per_direction=1,
            lower_db=-6.0,
            upper_db=6.0,
            min_fraction_above_nominal=0.3,
            basis=f"{GEVS}: protoflight = limit + 3 dB, 1 per axis",
        ),
        A: s.ShockRule(
            margin_db=0.0,
            shocks_per_direction=1,
            lower_db=-6.0,
            upper_db=6.0,
            min_fraction_above_nominal=0.3,
            basis=f"{GEVS}: acceptance = limit, 1 per axis",
        ),
    },
    analysis=s.AnalysisRule(
        margin_db=3.0, basis="common practice: analyse at the qualification level (limit + 3 dB)"
    ),
    equivalence=s.EquivalenceRule(
        b=[4.0, 6.4, 8.0, 12.0],
        basis="common practice: report the FDS for a spread of Basquin exponents "
        "(Steinberg 6.4 for electronics; Lalanne 8 for metals)",
    ),
)

_MIL_RANDOM = s.RandomRule(
    margin_db=0.0,
    duration_s=3600.0,
    compression_exponent=7.5,
    basis=f"{MIL810}: no grade factors (tailored life-cycle levels); 514.8 Annex A time "
    "compression t2/t1 = (S1/S2)^m with m = 7.5 for random; 1 h per axis",
)
_MIL_SINE = s.SineRule(
    factor=1.0,
    sweep_rate_oct_per_min=1.0,
    direction="up-down",
    basis="MIL-STD-810H tailoring with IEC 60068-2-6 style sweeps, 1 oct/min (from memory; verify)",
)
_MIL_SHOCK = s.ShockRule(
    margin_db=0.0,
    shocks_per_direction=3,
    directions="both",
    lower_db=-1.5,
    upper_db=3.0,
    outer_lower_db=-3.0,
    outer_upper_db=6.0,
    min_share_within_band=0.9,
    min_fraction_above_nominal=0.0,
    basis=f"{MIL810}: 516.8 Procedure I, 3 shocks in each direction of each axis; SRS "
    "within -1.5/+3 dB over at least 90 % of the points, the rest within -3/+6 dB",
)

GENERAL_MILITARY_DEFAULTS = s.PolicyRules(
    random={g: _MIL_RANDOM for g in (Q, P, A)},
    sine={g: _MIL_SINE for g in (Q, P, A)},
    shock={g: _MIL_SHOCK for g in (Q, P, A)},
    analysis=s.AnalysisRule(
        margin_db=0.0,
        basis="limit level; factors of safety belong to the stress analysis (common practice)",
    ),
    equivalence=s.EquivalenceRule(b=[7.5], basis=f"{MIL810}: 514.8 Annex A exponent m = 7.5"),
)

DEFAULT_POLICIES = {
    "spaceflight-gevs": (
        "Spaceflight unit tests after GSFC-STD-7000B (GEVS)",
        GEVS,
        SPACEFLIGHT_DEFAULTS,
    ),
    "military-810h": (
        "Ground and air equipment after MIL-STD-810H tailoring",
        MIL810,
        GENERAL_MILITARY_DEFAULTS,
    ),
}


def ensure_default_policies(session: Session, actor: Actor) -> list[m.MarginPolicy]:
    """Create the shipped policies that are missing (never overwrites an edited one)."""
    repo = PolicyRepository(session)
    made = []
    for name, (description, basis, rules) in DEFAULT_POLICIES.items():
        if repo.by_name(name) is None:
            row = repo.add(
                m.MarginPolicy(
                    name=name,
                    description=description,
                    basis=basis,
                    rules=rules.model_dump(mode="json"),
                )
            )
            record(session, actor, "create", "policy", row.id, name=name, shipped=True)
            made.append(row)
    return made


def list_policies(session: Session) -> list[m.MarginPolicy]:
    return list(PolicyRepository(session).list())


def policy_ref(session: Session, ref: str | int) -> m.MarginPolicy:
    if (rid := ref_id(ref)) is not None:
        return get(session, m.MarginPolicy, rid, "policy")
    row = PolicyRepository(session).by_name(name_key(ref))
    if row is None:
        raise NotFound("policy", ref)
    return row


def rules_of(policy: m.MarginPolicy) -> s.PolicyRules:
    return s.PolicyRules.model_validate(policy.rules)


def copy_policy(
    session: Session, actor: Actor, policy_id: int, cmd: s.PolicyCopy
) -> m.MarginPolicy:
    require(actor, m.Role.engineer, "copying a policy")
    src = get(session, m.MarginPolicy, policy_id, "policy")
    row = _add_unique(
        session,
        m.MarginPolicy(
            name=cmd.name,
            description=cmd.description or f"copy of {src.name}",
            basis=src.basis,
            rules=dict(src.rules),
            copied_from_id=src.id,
        ),
        f"policy {cmd.name!r}",
    )
    record(session, actor, "copy", "policy", row.id, source=src.name)
    return row


def update_policy(
    session: Session,
    actor: Actor,
    policy_id: int,
    cmd: s.PolicyUpdate,
    expected_version: int | None,
) -> m.MarginPolicy:
    """Edit a policy's rules. Levels derived before keep their recipe and turn stale."""
    require(actor, m.Role.engineer, "editing a policy")
    row = get(session, m.MarginPolicy, policy_id, "policy")
    check_version("policy", row, expected_version)
    row.rules = cmd.rules.model_dump(mode="json")
    if cmd.description is not None:
        row.description = cmd.description
    row.updated_at = utcnow()
    session.flush()
    record(session, actor, "update", "policy", row.id, version=row.version)
    return row


# --- confirmation against the issue in force ----------------------------------------------

_FROM_MEMORY = re.compile(r"\s*\((?:values )?from memory; verify\)", re.I)


def standard_of(policy: m.MarginPolicy) -> str:
    """The standard a policy's values come from, without the "from memory" remark."""
    return _FROM_MEMORY.sub("", policy.basis or "").strip() or "its standard"


def confirm_policy(session: Session, actor: Actor, policy_id: int, issue: str,
                   note: str = "", expected_version: int | None = None
                   ) -> m.PolicyConfirmation:
    """Record that `actor` checked the policy's values against `issue`, the issue in force
    of its standard (an approver's decision; applies to the policy's current version:
    an edit of the rules afterwards needs a new confirmation)."""
    require(actor, m.Role.approver, "confirming a policy against its standard")
    row = get(session, m.MarginPolicy, policy_id, "policy")
    check_version("policy", row, expected_version)
    issue = check_line("issue", issue or "")
    if len(issue) > 200:
        raise ValidationFailed("issue", issue, "must be at most 200 characters")
    try:
        note = text_rule(note or "")
    except ValueError as exc:
        raise ValidationFailed("note", note, str(exc)) from exc
    done = m.PolicyConfirmation(policy_id=row.id, policy_version=row.version, issue=issue,
                                confirmed_by=actor.name, note=note)
    session.add(done)
    session.flush()
    record(session, actor, "confirm", "policy", row.id, version=row.version, issue=issue)
    return done


def confirmation_of(session: Session, policy: m.MarginPolicy) -> m.PolicyConfirmation | None:
    """The newest confirmation of the policy's current version, if any."""
    return session.scalar(
        select(m.PolicyConfirmation)
        .where(m.PolicyConfirmation.policy_id == policy.id,
               m.PolicyConfirmation.policy_version == policy.version)
        .order_by(m.PolicyConfirmation.id.desc()).limit(1))


def basis_statement(session: Session, policy: m.MarginPolicy) -> str:
    """How far a policy's values can be trusted, as the issued documents state it:
    "<standard>: checked against the issue in force (<issue>): <by>, <date>" once an
    approver confirmed the current version, else "values from memory of <standard>; to
    be checked before use"."""
    standard = standard_of(policy)
    done = confirmation_of(session, policy)
    if done is None:
        return f"values from memory of {standard}; to be checked before use"
    return (f"{standard}: checked against the issue in force ({done.issue}): "
            f"{done.confirmed_by}, {done.created_at:%Y-%m-%d}")
