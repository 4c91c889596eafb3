"""Find the packaged data folders (templates/, migrations/) in a wheel or a checkout.

In a wheel they are installed as ``qualplan/_data/<name>`` (hatchling
force-include, see pyproject.toml); in an editable install they are the top-level
folders of the checkout.
"""

from __future__ import annotations

from pathlib import Path

_PACKAGE_DIR = Path(__file__).resolve().parent


def data_dir(name: str) -> Path:
    """Path of the packaged folder `name` ("templates" or "migrations")."""
    for candidate in (_PACKAGE_DIR / "_data" / name, _PACKAGE_DIR.parent / name):
        if candidate.is_dir():
            return candidate
    raise FileNotFoundError(f"qualplan data folder {name!r} not found beside {_PACKAGE_DIR}")
