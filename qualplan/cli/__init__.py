"""The qualplan command line: ``qualplan --help`` lists the commands."""

from qualplan.cli import commands as _commands  # noqa: F401  (registers the work commands)
from qualplan.cli import demo as _demo  # noqa: F401  (registers `qualplan demo`)
from qualplan.cli import jobs as _jobs  # noqa: F401  (registers `qualplan worker`, `job`)
from qualplan.cli import modal as _modal  # noqa: F401  (registers `qualplan modal`)
from qualplan.cli import records as _records  # noqa: F401  (registers `qualplan record`)
from qualplan.cli import report as _report  # noqa: F401  (registers `qualplan report`)
from qualplan.cli import transfer as _transfer  # noqa: F401  (registers `qualplan transfer`)
from qualplan.cli.base import app, main

__all__ = ["app", "main"]
