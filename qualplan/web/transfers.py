"""Environments down the product tree, from a product's page: its mounting in its parent
(signed axis permutation or direction cosines), the program's transfer rules (create one,
or revise one: zone transmissibility table, mass attenuation) and a transferred
environment derived from the parent's through the mounting and the rules.

The forms parse their fields and call planning.transfers, the use cases the API calls
too; a refused form re-renders the product page with the error naming the field and the
value, and nothing is stored (web.common.action).
"""

from __future__ import annotations

import re

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from qualplan.planning import catalog, transfers
from qualplan.planning.errors import ValidationFailed
from qualplan.planning.inputs import parse_number
from qualplan.web.common import Ctx, CtxDep, action, form_of, number, text
from qualplan.web.programs import product_page

router = APIRouter(include_in_schema=False)


def _again(ctx: Ctx, product_id: int, form, where: str):
    """The product page with the refusal: by its form, or at the top of the page when
    the product has no parent (its page has no such form)."""
    def again(message: str, status: int) -> Response:
        if catalog.product_by_id(ctx.db, product_id).parent_id is None:
            where_ = None
        else:
            where_ = where
        return product_page(ctx, product_id, message, status, form, where_)

    return again


AXES = ("X", "Y", "Z")
_SEPARATORS = re.compile(r"[,;\s]+")


def numbers_of(field: str, raw: str, count: int | None = None) -> list[float]:
    """The numbers of one typed line ("0.6, 0.8, 0"): commas, semicolons or spaces
    between them; each a plain decimal literal (inputs.parse_number)."""
    cells = [c for c in _SEPARATORS.split(raw.strip()) if c]
    if count is not None and len(cells) != count:
        raise ValidationFailed(field, raw, f"must hold {count} numbers, separated by commas "
                               "or spaces")
    return [float(parse_number(field, c)) for c in cells]


def table_of(field: str, raw: str) -> tuple[list[float], list[float], list[int]]:
    """A two-column table typed one row a line: frequency [Hz] and value, and the line
    number of each row (blank lines and # comments skipped)."""
    f, v, lines = [], [], []
    for i, line in enumerate(raw.splitlines(), start=1):
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        a, b = numbers_of(f"{field} line {i}", line, 2)
        f.append(a)
        v.append(b)
        lines.append(i)
    if not f:
        raise ValidationFailed(field, raw, "give the table: one 'frequency [Hz], |T| [g/g]' "
                               "pair a line")
    return f, v, lines


_SPEC_CELL = re.compile(r"spec\.(freq_hz|gain)(?:\[(\d+)\])?$")


def _on_table(lines: list[int], exc: ValidationFailed) -> ValidationFailed:
    """A refused cell of the rule's table named by the form's field and line."""
    hit = _SPEC_CELL.match(exc.field)
    if hit is None:
        return exc
    what = "frequency" if hit.group(1) == "freq_hz" else "|T|"
    if hit.group(2) is None or int(hit.group(2)) >= len(lines):
        return ValidationFailed(f"table ({what} column)", exc.value, exc.rule)
    return ValidationFailed(f"table line {lines[int(hit.group(2))]} ({what})", exc.value,
                            exc.rule)


def _mounting_cmd(form) -> transfers.MountingIn:
    version = number(form, "expected_version", integer=True)
    if text(form, "frame") == "matrix":
        rows = [numbers_of(f"matrix.{ax}", text(form, f"matrix.{ax}"), 3) for ax in AXES]
        return transfers.MountingIn(matrix=rows, note=text(form, "note"),
                                    expected_version=version)
    return transfers.MountingIn(axes={ax: text(form, f"axes.{ax}") for ax in AXES},
                                note=text(form, "note"), expected_version=version)


@router.post("/products/{product_id}/mounting")
async def set_mounting(product_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def do() -> str:
        transfers.set_mounting(ctx.db, ctx.actor, product_id, _mounting_cmd(form))
        return f"/products/{product_id}#mounting"

    return await run_in_threadpool(action, ctx, form, do,
                                   _again(ctx, product_id, form, "mounting"))


def _rule_spec(kind: str, form) -> tuple[dict, list[int]]:
    """The rule's spec and the form line of each table row (empty: no table)."""
    if kind == "zone_transmissibility":
        f, g, lines = table_of("table", text(form, "table"))
        return {"freq_hz": f, "gain": g}, lines
    if kind != "mass_attenuation":
        raise ValidationFailed("kind", kind,
                               "must be 'zone_transmissibility' or 'mass_attenuation'")
    method = text(form, "method")
    spec: dict = {"method": method}
    if method == "mass_loading":
        spec["mounting_mass_kg"] = number(form, "mounting_mass_kg")
        if (cap := number(form, "max_reduction_db")) is not None:
            spec["max_reduction_db"] = cap
    return spec, []


@router.post("/products/{product_id}/transfer-rules")
async def save_rule(product_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    """Create a transfer rule of the product's program, or revise the one chosen."""
    form, _ = await form_of(request)

    def do() -> str:
        product = catalog.product_by_id(ctx.db, product_id)
        rule_id = number(form, "rule_id", integer=True)
        kind = text(form, "kind") if rule_id is None else transfers.rule_by_id(
            ctx.db, rule_id).kind
        spec, lines = _rule_spec(kind, form)
        try:
            if rule_id is None:
                transfers.create_rule(ctx.db, ctx.actor, transfers.RuleCreate(
                    program_id=product.program_id, name=text(form, "name"), kind=kind,
                    spec=spec, basis=text(form, "basis"), provenance=text(form, "provenance"),
                    note=text(form, "note") or "first revision"))
            else:
                transfers.revise_rule(ctx.db, ctx.actor, rule_id, transfers.RuleRevisionIn(
                    spec=spec, basis=text(form, "basis"), provenance=text(form, "provenance"),
                    note=text(form, "note")))
        except ValidationFailed as exc:
            raise _on_table(lines, exc) from exc
        return f"/products/{product_id}#rules"

    return await run_in_threadpool(action, ctx, form, do,
                                   _again(ctx, product_id, form, "rule"))


@router.post("/products/{product_id}/transferred-environments")
async def derive_transferred(product_id: int, request: Request, ctx: Ctx = CtxDep) -> Response:
    form, _ = await form_of(request)

    def ids(name: str) -> list[int]:
        return [int(parse_number(name, v, integer=True)) for v in form.getlist(name)]

    def do() -> str:
        rev = transfers.derive_transferred(ctx.db, ctx.actor, transfers.TransferCreate(
            product_id=product_id, name=text(form, "name"), axis=text(form, "axis"),
            parent_environment_ids=ids("parent_environment_ids"), rule_ids=ids("rule_ids"),
            phase_id=number(form, "phase_id", integer=True), note=text(form, "note")))
        return f"/environments/{rev.environment_id}"

    return await run_in_threadpool(action, ctx, form, do,
                                   _again(ctx, product_id, form, "transfer"))
