"""The work commands, one module per aggregate: users and tokens, programs and products,
environments, policies, levels, requirements and evidence, events. Importing this module
registers them all on the main app, in this order (the order of ``qualplan --help``)."""

from __future__ import annotations

import importlib

from qualplan.cli.common import local_actor, work

AGGREGATES = ("users", "programs", "environments", "policies", "levels", "requirements",
              "events")
for _name in AGGREGATES:
    importlib.import_module(f"qualplan.cli.{_name}")

__all__ = ["AGGREGATES", "local_actor", "work"]
