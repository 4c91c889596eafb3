"""`qualplan worker` and `qualplan record analyse` on the run's database."""

from __future__ import annotations

import json
from types import SimpleNamespace

import numpy as np

from qualplan.cli import main
from tests.dbutil import backend


class _Runner:
    """main() as a user calls it: exit codes (2 for a refused command) and output."""

    def __init__(self, capsys) -> None:
        self.capsys = capsys

    def invoke(self, _app, args):
        try:
            main(list(args))
            code = 0
        except SystemExit as exc:
            code = int(exc.code or 0)
        out = self.capsys.readouterr()
        return SimpleNamespace(exit_code=code, output=out.out + out.err)


def test_worker_explains_sqlite_and_analyse_waits(fresh_db_url, tmp_path, capsys):
    runner, app = _Runner(capsys), None
    db_url = fresh_db_url
    # the first init makes the CLI's user (the login name) the admin
    assert runner.invoke(app, ["init", "--db", db_url]).exit_code == 0
    if backend() == "sqlite":
        r = runner.invoke(app, ["worker", "--db", db_url])
        assert r.exit_code == 2 and "needs PostgreSQL" in r.output
    fs = 2000.0
    t = np.arange(4000) / fs
    np.save(tmp_path / "run.npy", np.column_stack([3 * np.sin(2 * np.pi * 100.0 * t)]))
    assert runner.invoke(app, ["program", "add", "jobs-cli", "--db", db_url]).exit_code in (0, 2)
    runner.invoke(app, ["product", "add", "box", "--program", "jobs-cli", "--db", db_url])
    r = runner.invoke(app, ["record", "import", str(tmp_path / "run.npy"), "--channel-axes", "Z",
                            "--unit", "g", "--fs-hz", "2000", "--product", "box", "--name",
                            "run", "--program", "jobs-cli", "--db", db_url, "--json"])
    assert r.exit_code == 0, r.output
    rid = json.loads(r.output)["revision_id"]
    if backend() == "sqlite":
        r = runner.invoke(app, ["record", "analyse", str(rid), "--no-wait", "--db", db_url])
        assert r.exit_code == 2 and "--no-wait needs PostgreSQL" in r.output
        r = runner.invoke(app, ["record", "analyse", str(rid), "--resolution-hz", "10",
                                "--db", db_url])
        assert r.exit_code == 0, r.output
        # sine of 3 g peak: 3 / sqrt(2) = 2.121 g rms (closed form; 10 periods a segment)
        assert "succeeded" in r.output and "2.121 g rms from the Welch PSD" in r.output
    else:
        r = runner.invoke(app, ["record", "analyse", str(rid), "--no-wait", "--db", db_url])
        assert r.exit_code == 0, r.output
        job_id = int([ln for ln in r.output.splitlines() if ln.strip().isdigit()][-1])
        from qualplan.planning.queue import run_worker

        run_worker(db_url, wait=False)
        r = runner.invoke(app, ["job", "show", str(job_id), "--db", db_url])
        assert "succeeded" in r.output, r.output
