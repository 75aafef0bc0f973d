"""The results workspace in headless chromium: curves read out on hover, a layout that fits
1280x800 and 1920x1080, runs kept per mesh (by content) and never overlaid across meshes.

Screenshots go to $HEATSOAK_UI_SHOTS or a pytest temporary folder (the path is printed).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from uidriver import DEMO, copy_demo_files, discard_if_asked, open_listed, open_section, require_browser, run_and_wait, wait_for

pytestmark = pytest.mark.browser
playwright_api = require_browser()

#: What the plot widget holds, read from the page: (run, curve) of every curve drawn.
CURVES_JS = ("sel => [...document.querySelector(sel + ' .js-plotly-plot').data]"
             ".filter(t => t.meta).map(t => [t.meta.run, t.meta.curve])")


@pytest.fixture(scope="module")
def data_dir(tmp_path_factory) -> Path:
    names = (DEMO.name, "platen.msh", "platen_base.csv", "lblock.vtu", "lblock_cooling.toml")
    return copy_demo_files(tmp_path_factory.mktemp("results-data"), names)


def hover_probe(page, t: float) -> tuple:
    """Move the mouse over the probe plot near time ``t`` [s]; (the time the read-out is for, its text)."""
    box = page.evaluate("""t => { const g = document.querySelector('#hs-probe-plot .js-plotly-plot');
        const r = g.getBoundingClientRect(), xa = g._fullLayout.xaxis, ya = g._fullLayout.yaxis;
        return [r.left + xa._offset + xa.l2p(t), r.top + ya._offset + ya._length / 2]; }""", t)
    page.mouse.move(box[0] - 30, box[1])
    page.mouse.move(box[0], box[1], steps=4)
    label = page.locator("#hs-probe-plot .hoverlayer")
    wait_for(lambda: "sleeve" in label.text_content(), 10, what="the hover label")
    return float(label.locator(".legendtitletext").text_content()), label.text_content()


def not_clipped(page, container: str, inner: str) -> bool:
    """Whether ``inner`` lies inside ``container`` and the window, and ``container`` needs no sideways scroll."""
    return page.evaluate("""([c, i]) => { const box = document.querySelector(c), el = document.querySelector(i);
        const a = box.getBoundingClientRect(), b = el.getBoundingClientRect();
        return box.scrollWidth <= box.clientWidth + 1 && b.right <= a.right + 1 && b.left >= a.left - 1
               && b.right <= window.innerWidth && b.width > 0; }""", [container, inner])


def in_window(page, selector: str) -> bool:
    box = page.locator(selector).bounding_box()
    size = page.viewport_size
    return box is not None and box["y"] >= 0 and box["y"] + box["height"] <= size["height"] \
        and box["x"] + box["width"] <= size["width"]


def test_hover_on_a_probe_curve_reads_the_value_in_probes_csv(page, shots, tmp_path):
    page.set_viewport_size({"width": 1280, "height": 800})
    run_and_wait(page, 0)
    page.wait_for_selector("#hs-probe-plot .js-plotly-plot .scatterlayer .trace")
    page.wait_for_timeout(1000)  # the plot settles in its box
    at, text = hover_probe(page, 1000.0)
    assert abs(at - 1000.0) < 300.0  # the read-out is for a step near the mouse
    with page.expect_download() as dl:
        page.click("#hs-export-probes")
    path = tmp_path / "probes.csv"
    dl.value.save_as(path)
    rows = [line.split(",") for line in path.read_text().splitlines()]
    col = rows[0].index("sleeve")
    expected = next(float(r[col]) for r in rows[1:] if float(r[0]) == pytest.approx(at, rel=1e-5))
    shown = float(re.search(r"sleeve · run 1: ([-\d.]+) °C", text).group(1))
    assert shown == pytest.approx(expected, abs=5e-4)
    page.screenshot(path=str(shots / "r1-hover-1280x800.png"))


def test_four_runs_fit_1280x800_and_1920x1080_with_export_in_reach(page, shots):
    for n in (1, 2, 3):
        run_and_wait(page, n)
    ticked = page.locator(".hs-run-row input[type=checkbox]:checked")
    wait_for(lambda: ticked.count() == 2, 10, what="only the newest run and its comparison ticked")
    assert sorted({r for r, _ in page.evaluate(CURVES_JS, "#hs-probe-plot")}) == [3, 4]
    for width, height in ((1280, 800), (1920, 1080)):
        page.set_viewport_size({"width": width, "height": height})
        page.click("#hs-pane-curves")
        page.wait_for_timeout(800)
        page.screenshot(path=str(shots / f"r2-curves-{width}x{height}.png"))
        assert not_clipped(page, ".hs-probe-table", "#hs-probe-values th:last-child")
        assert page.inner_text("#hs-probe-values th:last-child") == "Reached at"
        assert in_window(page, "#hs-export-movie") and in_window(page, "#hs-probe-values th:last-child")
        page.click("#hs-pane-both")
        page.wait_for_timeout(800)
        page.screenshot(path=str(shots / f"r3-both-{width}x{height}.png"))
        assert in_window(page, "#hs-probe-plot") and in_window(page, ".hs-view")
    page.set_viewport_size({"width": 1280, "height": 800})
    page.click("#hs-tab-regions")
    page.wait_for_selector("#hs-region-plot .js-plotly-plot .scatterlayer .trace")
    page.screenshot(path=str(shots / "r3-regions-1280x800.png"))
    for selector in ("#hs-region-pick", "#hs-region-stat", "#hs-curves-csv", "#hs-tab-probes"):
        assert in_window(page, selector), selector
    page.click("#hs-tab-probes")
    page.set_viewport_size({"width": 1280, "height": 600})  # the run list must scroll, export stay in reach
    page.wait_for_timeout(500)
    assert in_window(page, "#hs-export-movie") and in_window(page, "#hs-disclaimer")


def test_runs_on_another_mesh_never_overlay_and_the_demo_reopened_keeps_its_runs(page, shots):
    page.set_viewport_size({"width": 1280, "height": 800})
    open_section(page, "Mesh")
    open_listed(page, "lblock_cooling.toml")
    page.wait_for_selector("#hs-facts >> text=lblock.vtu", timeout=30_000)
    # nothing of the platen stays on screen: status line, player, curves
    assert page.inner_text("#hs-progress-text") == ""
    assert page.locator("#hs-player").count() == 0 and not page.locator("#hs-curves").is_visible()
    assert page.locator(".hs-run-elsewhere").count() == 4
    run_and_wait(page, 4)
    row = page.locator(".hs-run-row").nth(4)
    assert "another mesh: platen.msh -> lblock.vtu" in row.inner_text()
    page.wait_for_selector("#hs-probe-plot .js-plotly-plot .scatterlayer .trace")
    assert {r for r, _ in page.evaluate(CURVES_JS, "#hs-probe-plot")} == {5}
    assert page.locator(".hs-run-row").nth(0).locator("input[type=checkbox]").is_disabled()
    page.screenshot(path=str(shots / "r4-other-mesh.png"))

    open_listed(page, DEMO.name)
    discard_if_asked(page)
    page.wait_for_selector("#hs-facts >> text=platen.msh", timeout=30_000)
    assert page.locator(".hs-run-elsewhere").count() == 1  # only the lblock run is elsewhere now
    page.locator(".hs-run-row").nth(1).locator("button .mdi-eye-outline").click()
    page.wait_for_selector("#hs-frame-time >> text=frame 1 of", timeout=15_000)
    assert {r for r, _ in page.evaluate(CURVES_JS, "#hs-probe-plot")} <= {1, 2, 3, 4}
    page.screenshot(path=str(shots / "r5-demo-reopened.png"))
