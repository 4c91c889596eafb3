"""SVG downloads of the overlay plots: each route answers image/svg+xml made by
reports.charts with the series the page plots; the record page's band is the verdict's."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from tests.web.overlay_world import OFF_DB, overlay_program


@pytest.fixture
def made(factory, users):
    return overlay_program(factory, users["viewer"].name)


def _plot_data(html: str, plot_id: str) -> dict:
    m = re.search(rf'<script type="application/json" id="data-{plot_id}">(.*?)</script>',
                  html, re.S)
    assert m, f"no plot {plot_id} on the page"
    return json.loads(m.group(1))


def _svg(viewer, url: str) -> str:
    r = viewer.get(url)
    assert r.status_code == 200, (url, r.text[:300])
    assert r.headers["content-type"].startswith("image/svg+xml"), r.headers["content-type"]
    assert r.text.lstrip().startswith("<?xml") and "<svg" in r.text
    assert "CAUTION: a responsible engineer must review" in r.text
    return r.text


def _names_in(svg: str, plot: dict) -> None:
    for item in plot["series"]:
        assert item["name"] in svg.replace("&gt;", ">"), item["name"]


def test_record_page_and_svg(browserless, users, made):
    viewer = browserless(users["viewer"])
    page = viewer.get(f"/evidence/{made['evidence_id']}")
    assert page.status_code == 200
    html = page.text
    assert "✗ failed" in html and f"/evidence/{made['evidence_id']}/plot.svg" in html
    plot = _plot_data(html, "record")
    by = {x["name"]: x for x in plot["series"]}
    tol = made["tolerance_db"]
    upper, lower = by[f"tolerance ±{tol:g} dB (upper)"], by[f"tolerance ±{tol:g} dB (lower)"]
    # the band the verdict used: the level at each record line x 10^(+/-3/10) (power dB,
    # GEVS +/-3 dB); the lines outside it are exactly the two lines moved 4 dB off
    rec = np.asarray(made["values"])
    nominal = rec.copy()
    for i, d in OFF_DB.items():
        nominal[i] /= 10 ** (d / 10)
    assert upper["x"] == pytest.approx(made["lines"], rel=1e-12)
    assert upper["y"] == pytest.approx((nominal * 10 ** (tol / 10)).tolist(), rel=1e-9)
    assert lower["y"] == pytest.approx((nominal * 10 ** (-tol / 10)).tolist(), rel=1e-9)
    out = [i for i, v in enumerate(rec) if not lower["y"][i] <= v <= upper["y"][i]]
    assert out == sorted(OFF_DB)
    assert "2 of 80 lines outside" in html  # the stored verdict's reason says the same
    svg = _svg(viewer, f"/evidence/{made['evidence_id']}/plot.svg")
    _names_in(svg, plot)
    # one drawn line per series (matplotlib's Line2D groups: line2d_1, line2d_2, ...)
    assert len(re.findall(r'<g id="line2d_\d+">\s*<path', svg)) >= len(plot["series"])
    # the requirement page links the record to its plot
    assert f'href="/evidence/{made["evidence_id"]}"' in viewer.get(
        f"/requirements/{made['requirement_id']}").text


def test_environment_level_and_coverage_svgs(browserless, users, made):
    viewer = browserless(users["viewer"])
    html = viewer.get(f"/environments/{made['env_id']}").text
    svg = _svg(viewer, f"/environments/{made['env_id']}/plot.svg")
    _names_in(svg, _plot_data(html, "env"))
    _names_in(svg, _plot_data(html, "env-diff"))  # the dB difference under the overlay
    cmp = _svg(viewer, f"/environments/{made['env_id']}/plot.svg?a=1&b=2")
    assert "revision 1" in cmp and "revision 2" in cmp
    bad = viewer.get(f"/environments/{made['env_id']}/plot.svg?a=1&b=9")
    assert bad.status_code == 422 and "a/b" in bad.text and "9" in bad.text

    html = viewer.get(f"/levels/{made['level_id']}").text
    svg = _svg(viewer, f"/levels/{made['level_id']}/plot.svg")
    _names_in(svg, _plot_data(html, "level"))
    for n in (1, 2, 3):
        plot = _plot_data(html, f"cov{n}")
        _names_in(_svg(viewer, f"/levels/{made['level_id']}/coverage-{n}.svg"), plot)
    assert viewer.get(f"/levels/{made['level_id']}/coverage-9.svg").status_code == 404

    html = viewer.get(f"/products/{made['product_id']}/coverage?grade=qualification").text
    ers = _plot_data(html, "seq-Z-2")
    names = [x["name"] for x in ers["series"]]
    assert names[0] == "test sequence ERS" and names[1] == "life ERS"
    assert names[2].startswith("over-test ceiling: life +")
    ceiling = np.asarray(ers["series"][2]["y"]) / np.asarray(ers["series"][1]["y"])
    limit_db = float(names[2].split("life ")[1].split(" dB")[0])
    # the ceiling is the life's ERS raised by the policy's over-test limit (amplitude dB)
    assert ceiling == pytest.approx(10 ** (limit_db / 20), rel=1e-9)
    for n in (1, 2, 3):
        plot = _plot_data(html, f"seq-Z-{n}")
        _names_in(_svg(viewer, f"/products/{made['product_id']}/coverage/Z-{n}.svg"
                       "?grade=qualification"), plot)
    r = viewer.get(f"/products/{made['product_id']}/coverage?grade=flight")
    assert r.status_code == 422 and "grade" in r.text and "flight" in r.text
