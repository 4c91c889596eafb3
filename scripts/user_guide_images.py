"""Regenerate the user guide's images (docs/images) from a fresh run of the demo.

    .venv/bin/python scripts/user_guide_images.py

Runs `qualplan demo` into a temporary folder, copies the specification's figures the guide
shows (the demo writes each figure as SVG beside its PDF) and renders the first page of the
qualification specification and of the audit report as PNG with pdftoppm (poppler-utils).
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
IMAGES = ROOT / "docs" / "images"

#: guide image -> the demo's figure (in the qualification specification's figure folder)
FIGURES = {
    "demo-random-x.svg": "-X-random-qualification-random-x.svg",
    "demo-random-x-coverage.svg": "-X-random-qualification-random-x-coverage.svg",
    "demo-random-z-p95.svg": "-Z-random-qualification-random-z.svg",
    "demo-sine-x.svg": "-X-sine-qualification-sine-x.svg",
    "demo-shock-z.svg": "-Z-shock-qualification-shock-z.svg",
    "demo-shock-z-coverage.svg": "-Z-shock-qualification-shock-z-coverage.svg",
}
#: guide image -> the demo's document whose first page it shows
PAGES = {"demo-spec-page.png": "TLS-*-Q-r1.pdf", "demo-audit-page.png": "MCA-*-r1.pdf"}


def _one(folder: Path, pattern: str) -> Path:
    found = sorted(folder.glob(pattern))
    if len(found) != 1:
        raise SystemExit(f"expected one {pattern} in {folder}, found {len(found)}")
    return found[0]


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "demo"
        subprocess.run([sys.executable, "-m", "qualplan.cli", "demo", "--out", str(out)],
                       check=True, stdout=subprocess.DEVNULL)
        docs = out / "documents"
        figures = _one(docs, "TLS-*-Q-r1-figures")
        for image, suffix in FIGURES.items():
            shutil.copyfile(_one(figures, f"*{suffix}"), IMAGES / image)
            print(f"docs/images/{image}")
        for image, pattern in PAGES.items():
            pdf = _one(docs, pattern)
            stem = Path(tmp) / image.removesuffix(".png")
            subprocess.run(["pdftoppm", "-png", "-r", "80", "-f", "1", "-l", "1",
                            "-singlefile", str(pdf), str(stem)], check=True)
            shutil.copyfile(stem.with_suffix(".png"), IMAGES / image)
            print(f"docs/images/{image}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
