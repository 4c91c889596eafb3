"""The qualplan command line: ``qualplan --help`` lists the commands."""

from qualplan.cli import commands as _commands  # noqa: F401  (registers the work commands)
from qualplan.cli.base import app, main

__all__ = ["app", "main"]
