"""`qualplan record import --channel-axes` and `qualplan record show`."""

from __future__ import annotations

import json

import h5py
import numpy as np
import pytest

from qualplan.cli import main


def run(capsys, *args: str) -> tuple[int, str, str]:
    try:
        main(list(args))
        code = 0
    except SystemExit as exc:
        code = int(exc.code or 0)
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def db(fresh_db_url, capsys):
    ok = lambda *a: run(capsys, *a, "--db", fresh_db_url)  # noqa: E731
    assert ok("init")[0] == 0
    assert ok("program", "add", "Survey drone")[0] == 0
    assert ok("product", "add", "Camera electronics")[0] == 0
    return ok


def test_import_hdf5_with_axes_and_show(db, tmp_path):
    x = np.random.default_rng(5).standard_normal((30_001, 3))
    p = tmp_path / "flight.h5"
    with h5py.File(p, "w") as f:
        f.create_dataset("accel", data=x)
    code, out, err = db("record", "import", str(p), "--channel-axes", "X,Y,Z", "--unit", "g",
                        "--fs-hz", "5000", "--dataset", "accel", "--product",
                        "Camera electronics", "--name", "flight 1", "--chunk-samples", "4096",
                        "--json")
    assert code == 0, err
    rec = json.loads(out)
    assert [c["axis"] for c in rec["channels"]] == ["X", "Y", "Z"]
    assert rec["n_samples"] == 30_001 and rec["n_chunks"] == 8  # ceil(30001 / 4096)
    # reference: numpy on the written array (rms of channel Y)
    assert rec["channels"][1]["stats"]["rms"]["value"] == pytest.approx(
        np.sqrt(np.mean(x[:, 1] ** 2)), rel=1e-12)
    code, out, err = db("record", "show", str(rec["revision_id"]))
    assert code == 0, err
    # frequencies as engineers write them: 5000 Hz reads "5 kHz" (planning.wording)
    assert "3 channels x 30001 samples at 5 kHz (6 s)" in out


def test_import_errors_are_one_line_exit_2(db, tmp_path):
    p = tmp_path / "r.npy"
    np.save(p, np.zeros((100, 2)))
    code, _, err = db("record", "import", str(p), "--channel-axes", "X,Y,Z", "--unit", "g",
                      "--fs-hz", "100", "--product", "Camera electronics", "--name", "r")
    assert code == 2 and "channel_axes" in err and err.count("\n") == 1
    code, _, err = db("record", "import", str(p), "--channel-axes", "X,Y", "--unit", "g",
                      "--product", "Camera electronics", "--name", "r")
    assert code == 2 and "--fs-hz" in err
    code, _, err = db("record", "import", str(p), "--channel-axes", "X,Y", "--unit", "furlong",
                      "--fs-hz", "100", "--product", "Camera electronics", "--name", "r")
    assert code == 2 and "unit" in err
