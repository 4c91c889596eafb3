"""The web pages on the run's migrated database: a TestClient for fast checks, and the
whole service under uvicorn on 127.0.0.1 driven by Debian's chromium through Playwright.

Rows are committed for real, so every test makes its own program under a unique name.
Screenshots go to test-artifacts/screenshots/ (named in the terminal summary).
"""

from __future__ import annotations

import os
import re
import shutil
import socket
import threading
import time
import uuid
from dataclasses import dataclass
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from qualplan.config import Settings
from qualplan.planning import access, catalog, policies
from qualplan.planning import schemas as s
from qualplan.planning.access import Actor
from qualplan.service import create_service
from qualplan.store.models import Role
from qualplan.store.session import make_sessionmaker, unit_of_work

ROOT = Path(__file__).resolve().parents[2]
SCREENSHOTS = ROOT / "test-artifacts" / "screenshots"
CHROMIUM = os.environ.get("QUALPLAN_TEST_CHROMIUM", "/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
    "--disable-component-update", "--disable-sync", "--no-first-run",
]
SETUP = Actor("web-test-setup", Role.admin)


def unique(stem: str) -> str:
    return f"{stem}-{uuid.uuid4().hex[:6]}"


def pytest_terminal_summary(terminalreporter):
    if SCREENSHOTS.is_dir() and any(SCREENSHOTS.glob("*.png")):
        n = len(list(SCREENSHOTS.glob("*.png")))
        terminalreporter.write_sep("-", "web screenshots")
        terminalreporter.write_line(f"{n} screenshots of the web pages in {SCREENSHOTS}")


@pytest.fixture(scope="session")
def factory(engine):
    return make_sessionmaker(engine)


@pytest.fixture(scope="session")
def settings(db_url) -> Settings:
    return Settings(database_url=db_url, max_upload_bytes=256 * 1024)


def _service(settings):
    return create_service(settings)


@dataclass(frozen=True)
class User:
    name: str
    role: Role
    token: str


@pytest.fixture(scope="session")
def users(factory) -> dict[str, User]:
    """A user and token per role (unique names), made through planning.access."""
    out = {}
    with unit_of_work(factory) as session:
        policies.ensure_default_policies(session, SETUP)
        for role in Role:
            name = unique(role.value)
            access.create_user(session, SETUP, name, role)
            out[role.value] = User(name, role, access.create_token(session, SETUP, name, "web"))
    return out


@dataclass(frozen=True)
class World:
    program_id: int
    program: str
    product_id: int
    product: str
    phase_id: int
    phase: str


@pytest.fixture
def world(factory, users) -> World:
    """A program with one unit and one life phase (made through planning)."""
    with unit_of_work(factory) as session:
        prog = catalog.create_program(session, SETUP, s.ProgramCreate(name=unique("Ridge drone")))
        unit = catalog.create_product(session, SETUP, s.ProductCreate(
            program_id=prog.id, name="Camera electronics", part_number="RSD-CE-01", mass_kg=2.4))
        phase = catalog.create_phase(session, SETUP, s.PhaseCreate(
            program_id=prog.id, name="survey flight", duration_s=1800.0, occurrences=100))
        for role, user in users.items():  # every test user holds its role in the program
            if role != Role.admin.value:
                access.grant(session, SETUP, user.name, prog.id, role)
        return World(prog.id, prog.name, unit.id, unit.name, phase.id, phase.name)


# --- TestClient -----------------------------------------------------------------------------

CSRF = re.compile(r'name="csrf" value="([^"]+)"')


class Browserless:
    """A TestClient signed in as one user, that reads the CSRF token from each page."""

    def __init__(self, client: TestClient) -> None:
        self.client = client
        self.csrf: str | None = None

    def get(self, path: str, **kw):
        r = self.client.get(path, **kw)
        if (m := CSRF.search(r.text)) is not None:
            self.csrf = m.group(1)
        return r

    def post(self, path: str, data: dict | None = None, *, csrf: bool = True, **kw):
        data = dict(data or {})
        if csrf:
            data.setdefault("csrf", self.csrf)
        r = self.client.post(path, data=data, **kw)
        if (m := CSRF.search(r.text)) is not None:
            self.csrf = m.group(1)
        return r

    def sign_in(self, token: str):
        self.get("/signin")
        return self.post("/signin", {"token": token, "next": "/programs"})


@pytest.fixture(scope="session")
def app(settings, users):
    return _service(settings)


@pytest.fixture
def browserless(app):
    def make(user: User | None = None) -> Browserless:
        client = TestClient(app)
        client.__enter__()
        made.append(client)
        b = Browserless(client)
        if user is not None:
            r = b.sign_in(user.token)
            assert r.status_code == 200 and "/programs" in str(r.url), r.text[:500]
        return b

    made: list[TestClient] = []
    yield make
    for c in made:
        c.__exit__(None, None, None)


# --- the live service and the browser ---------------------------------------------------------


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@pytest.fixture(scope="session")
def live_url(settings, users):
    import uvicorn

    port = _free_port()
    config = uvicorn.Config(_service(settings), host="127.0.0.1", port=port, log_level="warning",
                            lifespan="on")
    server = uvicorn.Server(config)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    deadline = time.monotonic() + 20
    while not server.started:
        if time.monotonic() > deadline or not thread.is_alive():
            pytest.fail("the service did not start under uvicorn within 20 s")
        time.sleep(0.05)
    yield f"http://127.0.0.1:{port}"
    server.should_exit = True
    thread.join(timeout=10)


def _missing_browser() -> str | None:
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return "the Python package playwright is not installed (pip install playwright)"
    if not (Path(CHROMIUM).is_file() or shutil.which(CHROMIUM)):
        return f"chromium not found at {CHROMIUM} (apt-get install chromium)"
    return None


@pytest.fixture(scope="session")
def chromium():
    reason = _missing_browser()
    if reason is not None:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(f"browser tests cannot run under CI: {reason}")
        pytest.skip(f"browser tests skipped: {reason}")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield browser
        browser.close()


@pytest.fixture
def new_page(chromium, live_url):
    """Open a page in a fresh browser context (own cookies); closes them after the test."""
    contexts = []

    def make():
        ctx = chromium.new_context(base_url=live_url, viewport={"width": 1280, "height": 900})
        ctx.set_default_timeout(20_000)
        contexts.append(ctx)
        return ctx.new_page()

    yield make
    for ctx in contexts:
        ctx.close()


@pytest.fixture(scope="session")
def shots():
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)

    def take(page, name: str) -> Path:
        path = SCREENSHOTS / f"{name}.png"
        page.screenshot(path=str(path), full_page=True)
        return path

    return take
