"""Settings of the service and the CLI (pydantic-settings).

Every setting can be given as an environment variable with the prefix
``QUALPLAN_`` (``QUALPLAN_DATABASE_URL`` ...). The CLI's ``--db`` option wins over
the environment.
"""

from __future__ import annotations

from pathlib import Path

from platformdirs import user_data_dir
from pydantic import Field
from pydantic_settings import BaseSettings, SettingsConfigDict


def default_data_dir() -> Path:
    """Per-user data folder (``~/.local/share/qualplan`` on Linux, see platformdirs)."""
    return Path(user_data_dir("qualplan", appauthor=False))


def default_database_url() -> str:
    """SQLite file ``qualplan.db`` in the per-user data folder."""
    return f"sqlite:///{default_data_dir() / 'qualplan.db'}"


class Settings(BaseSettings):
    """Runtime settings. Built once by each interface, passed down as arguments."""

    model_config = SettingsConfigDict(env_prefix="QUALPLAN_", extra="ignore")

    database_url: str = Field(default_factory=default_database_url)
    #: Largest accepted upload (environment files, test records) [bytes].
    max_upload_bytes: int = 50 * 1024 * 1024
    #: Largest accepted record upload (a file sent with ``channel_axes`` to the upload
    #: routes, stored in chunks) [bytes]; every other body keeps ``max_upload_bytes``.
    max_record_upload_bytes: int = 4 * 1024 ** 3
    #: Folder of the files that document jobs write for the API and the web pages
    #: (one sub-folder per job). With workers on other machines it must be a folder they
    #: share with the API processes (docs/deploy.md).
    job_files_dir: Path = Field(default_factory=lambda: default_data_dir() / "job-files")
    #: Treat the service as served over TLS (sets the Secure flag on cookies).
    behind_tls: bool = False
    #: Secret that signs the web pages' session cookies; random per process when unset
    #: (a restart then signs everyone out). Set it for a deployment.
    web_secret: str | None = None
