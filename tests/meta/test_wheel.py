"""The wheel carries templates/ and migrations/ and works outside the checkout."""

from __future__ import annotations

import subprocess
import sys
import sysconfig
import venv
import zipfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_wheel_installs_and_initialises_a_database(tmp_path):
    wheel_dir = tmp_path / "wheel"
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "-q",
         "-w", str(wheel_dir), str(ROOT)],
        check=True, capture_output=True, timeout=300,
    )
    (wheel,) = wheel_dir.glob("qualplan-*.whl")
    names = zipfile.ZipFile(wheel).namelist()
    assert "qualplan/_data/migrations/env.py" in names
    assert any(n.startswith("qualplan/_data/migrations/versions/") for n in names)
    assert "qualplan/_data/templates/shared/caution.html" in names

    # A fresh venv with only the wheel; the dependencies come from this interpreter's
    # site-packages through a .pth file (installing them again would only cost time).
    env_dir = tmp_path / "venv"
    venv.create(env_dir, with_pip=False)
    py = env_dir / "bin" / "python"
    site = Path(subprocess.run([str(py), "-c", "import sysconfig;print(sysconfig.get_paths()"
                                "['purelib'])"], capture_output=True, text=True,
                               check=True).stdout.strip())
    (site / "outer-deps.pth").write_text(sysconfig.get_paths()["purelib"] + "\n")
    subprocess.run([sys.executable, "-m", "pip", "install", "--no-deps", "-q",
                    "--target", str(site), str(wheel)], check=True, capture_output=True,
                   timeout=300)

    where = subprocess.run(
        [str(py), "-c", "import qualplan.resources as r;"
         "print(r.data_dir('migrations'));print(r.data_dir('templates'))"],
        capture_output=True, text=True, check=True, cwd=tmp_path,
    ).stdout.split()
    assert all(str(site) in w for w in where), where

    db = tmp_path / "from-wheel.db"
    out = subprocess.run([str(py), "-m", "qualplan.cli", "init", "--db", f"sqlite:///{db}"],
                         capture_output=True, text=True, cwd=tmp_path, timeout=120)
    assert out.returncode == 0, out.stderr
    assert "schema revision" in out.stdout and db.exists()
