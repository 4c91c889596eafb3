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


def test_level_derive_and_report_audit_as_jobs(fresh_db_url, tmp_path, capsys):
    """--wait runs the derivation (and the report) as a job followed with the progress
    bar; on PostgreSQL --no-wait prints the job id and a worker runs it."""
    runner, app, db = _Runner(capsys), None, fresh_db_url

    def ok(*args):
        r = runner.invoke(app, [*args, "--db", db])
        assert r.exit_code == 0, r.output
        return r

    ok("init")
    ok("program", "add", "jobs-derive")
    ok("product", "add", "box", "--program", "jobs-derive")
    ok("phase", "add", "flight", "--duration-s", "120", "--program", "jobs-derive")
    table = tmp_path / "flat.csv"
    table.write_text("frequency,ASD\n20,0.04\n2000,0.04\n")  # invented flat PSD
    ok("env", "add", "flat Z", "--product", "box", "--kind", "random", "--axis", "Z",
       "--phase", "flight", "--file", str(table), "--units", "g^2/Hz",
       "--program", "jobs-derive")
    args = ["level", "derive", "random Z", "--product", "box", "--kind", "random", "--axis",
            "Z", "--revisions", "1", "--program", "jobs-derive"]
    if backend() == "sqlite":
        r = runner.invoke(app, [*args, "--no-wait", "--db", db])
        assert r.exit_code == 2 and "--no-wait needs PostgreSQL" in r.output
        level = json.loads(ok(*args, "--wait", "--json").output)
    else:
        r = ok(*args, "--no-wait")
        job_id = int([ln for ln in r.output.splitlines() if ln.strip().isdigit()][-1])
        from qualplan.planning.queue import run_worker

        run_worker(db, wait=False)
        assert "succeeded" in ok("job", "show", str(job_id)).output
        level = json.loads(ok("level", "show", "1", "--json").output)
    assert (level["name"], level["number"]) == ("random Z", 1)
    # one flat input: the limit level is it, sqrt(0.04 x 1980) = 8.899 g rms (closed form)
    assert abs(level["result"]["limit"]["grms"] - (0.04 * 1980.0) ** 0.5) < 1e-9 * 8.9
    if backend() == "sqlite":
        r = runner.invoke(app, ["report", "audit", "--out", str(tmp_path / "audit"), "--wait",
                                "--program", "jobs-derive", "--db", db])
        assert r.exit_code in (0, 1), r.output  # 1: the gate is shut (nothing verified)
        assert "MCA-" in r.output and "revision 1 (issued)" in r.output
        assert any(p.suffix == ".pdf" for p in (tmp_path / "audit").iterdir())
