"""`qualplan demo --out DIR` on a fresh folder, as a newcomer runs it."""

from __future__ import annotations

import subprocess
import sys

from pypdf import PdfReader

from qualplan.dynamics import psd as core_psd
from qualplan.planning import imports
from qualplan.store.models import EnvironmentKind


def run_cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "qualplan.cli", *args],
                          capture_output=True, text=True, timeout=600)


def test_demo_builds_everything_in_its_folder(tmp_path):
    out_dir = tmp_path / "demo"
    out = run_cli("demo", "--out", str(out_dir))
    assert out.returncode == 0, out.stderr[-3000:]
    assert (out_dir / "qualplan.db").is_file()
    docs = out_dir / "documents"
    pdfs = sorted(p.name for p in docs.glob("*.pdf"))
    assert len(pdfs) == 4, pdfs
    assert any(p.startswith("TLS-") and "-Q-" in p for p in pdfs)
    assert any(p.startswith("TLS-") and "-A-" in p for p in pdfs)
    assert any(p.startswith("MCA-") for p in pdfs)
    assert any(p.startswith("ALP-") for p in pdfs)  # the analysis loads package
    for name in pdfs:
        assert len(PdfReader(str(docs / name)).pages) >= 1
    assert len(list(docs.glob("*.csv"))) >= 10 and len(list(docs.glob("*.json"))) == 4
    # The summary: paths, the audit verdict with its blocking items, the sign-in token.
    assert str(out_dir / "qualplan.db") in out.stdout
    assert "NOT READY" in out.stdout and "failed" in out.stdout and "stale" in out.stdout
    assert "qualplan serve --db" in out.stdout and "token qp_" in out.stdout
    # A random breakpoint table loads back into the core.
    table = next(docs.glob("TLS-*-Q-r1-X-random-*.csv"))
    data = imports.breakpoints_from_csv(EnvironmentKind.random, table.read_bytes(),
                                        value_units="g^2/Hz")
    assert core_psd.grms(data["freq_hz"], data["asd_g2_hz"]) > 0
    # The database is a working qualplan database: the audit command agrees (exit 1).
    audit = run_cli("audit", "--db", f"sqlite:///{out_dir / 'qualplan.db'}")
    assert audit.returncode == 1 and "NOT READY" in audit.stdout
    # One analysis requirement is closed by a CQC response estimate of the modal summary.
    import json

    reqs = json.loads(run_cli("req", "list", "--json", "--db",
                              f"sqlite:///{out_dir / 'qualplan.db'}").stdout)
    feet = next(r for r in reqs if r["key"] == "PEU-STR-02")
    assert feet["status"] == "verified" and "base_force_cqc_n" in feet["status_reason"]
    # The unit takes its flight X and Y from the pod through the shelf's transmissibility
    # and its axis frame (issue 18), and its qualification random X is force limited,
    # its deep notches accepted (the issued JSON is the document's content).
    origins = run_cli("env", "list", "--product", "Payload electronics unit", "--json",
                      "--db", f"sqlite:///{out_dir / 'qualplan.db'}")
    rows = {r["name"]: r for r in json.loads(origins.stdout)}
    shelf = rows["survey flight X (shelf)"]
    assert shelf["origin"] == "transferred" and shelf["from_product"] == "Sensor pod"
    assert shelf["through"][0] == "mounting" and "pod electronics shelf" in shelf["through"][1]
    spec = json.loads(next(docs.glob("TLS-*-Q-r1.json")).read_text())
    (rx,) = [x for x in spec["sections"] if x["kind"] == "random" and x["axis"] == "X"]
    fl = rx["force_limit"]
    assert fl["rows"] and fl["notches"] and fl["notched_freq_hz"]
    assert fl["needs_acceptance"] and fl["accepted_by"] == "demo"
    assert not any("force limit" in w for w in spec["warnings"]), spec["warnings"]
    # Running again into the same folder is refused in one line, without --replace.
    again = run_cli("demo", "--out", str(out_dir))
    assert again.returncode == 2
    assert again.stderr.strip().startswith("error:") and "--replace" in again.stderr
