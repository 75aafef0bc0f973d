"""The browser UI as an analyst goes through it: units of bare meshes, probe messages where the probe is,
the file list, and the results area in a small window.

One ``heatsoak ui`` server serves every test in this file, in order.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pytest
import tomllib
from uidriver import DEMO, choose, copy_demo_files, fill, open_listed, open_section, require_browser, wait_for

pytestmark = pytest.mark.browser
playwright_api = require_browser()



@pytest.fixture(scope="module")
def data_dir(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("ui-round3-data")
    copy_demo_files(folder, ("platen_warmup.toml", "platen.msh", "platen_base.csv", "lblock.vtu", "lblock_cooling.toml",
                             "platen_p2_cycling.toml", "platen_p2.msh"))
    # the demo case with a word for the first probe's threshold
    text = DEMO.read_text()
    assert "threshold = 30" in text
    (folder / "badthreshold.toml").write_text(text.replace("threshold = 30", 'threshold = "hot"', 1))
    return folder


def fact(page, label: str) -> str:
    """The value cell of a row of the mesh facts table."""
    return page.locator("#hs-facts tr", has_text=label).first.locator("td").nth(1).inner_text()


def extent(path: Path) -> np.ndarray:
    """Bounding-box sides of a mesh file in its own coordinates, read by meshio (not by heatsoak)."""
    import meshio

    points = meshio.read(path).points
    return points.max(axis=0) - points.min(axis=0)


def size_text(sides, scale: float) -> str:
    """The sides as the facts table writes them (JavaScript ``toPrecision(4)``)."""
    return " × ".join(f"{s * scale:#.4g}" for s in sides)


def test_a_bare_mesh_opened_after_a_mm_case_is_read_in_metres_and_says_so(page, data_dir):
    assert fact(page, "Read in") == "mm · from platen_warmup.toml"
    open_listed(page, "lblock.vtu")
    page.wait_for_selector("#hs-fact-unit >> text=the file states no unit", timeout=30_000)
    assert page.locator("#hs-unit").input_value() == "m"
    sides = extent(data_dir / "lblock.vtu")
    assert fact(page, "Size") == size_text(sides, 1.0) + " m"
    # The analyst says the file was drawn in mm: read again, and the facts follow.
    choose(page, "#hs-unit", "mm")
    page.wait_for_selector("#hs-fact-unit >> text=mm · as chosen", timeout=15_000)
    wait_for(lambda: fact(page, "Size") == size_text(sides, 1.0) + " mm", 15, what="the size in mm")
    # A part 0.1 mm across is implausible: the mesh checks say so beside the facts.
    page.wait_for_selector("#hs-facts >> text=the unit is wrong", timeout=15_000)


def test_files_added_to_the_data_folder_appear_after_a_refresh(page, data_dir):
    shutil.copy(data_dir / "lblock.vtu", data_dir / "added later.vtu")
    assert page.locator(".hs-file", has_text="added later.vtu").count() == 0
    page.click("#hs-refresh-files")
    page.wait_for_selector(".hs-file >> text=added later.vtu", timeout=15_000)


def test_a_bad_threshold_from_a_case_is_shown_on_the_probe_row_and_at_run(page):
    open_listed(page, "badthreshold.toml")
    page.wait_for_selector("#hs-fact-unit >> text=from badthreshold.toml", timeout=30_000)
    open_section(page, "Probes")
    issue = page.locator("#hs-probe-list .hs-probe-issue")
    issue.wait_for(timeout=15_000)
    assert issue.count() == 1
    assert "top-mid" in issue.inner_text() and "threshold: 'hot' is not a number" in issue.inner_text()
    page.wait_for_selector("#hs-run-reason >> text=probe[0].threshold (top-mid)", timeout=15_000)
    assert page.locator("#hs-run").is_disabled()
    # Removing that probe clears both messages and allows the run.
    page.locator("#hs-probe-list tr", has_text="top-mid").first.locator("button").click()
    page.wait_for_selector("#hs-probe-list .hs-probe-issue", state="detached", timeout=15_000)
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)


def test_a_probe_message_does_not_outlive_the_mesh_it_was_typed_for(page):
    open_section(page, "Probes")
    fill(page, "#hs-p-x", "abc")
    page.click("#hs-add-probe")
    page.wait_for_selector("#hs-probe-error >> text='abc' is not a number", timeout=15_000)
    open_section(page, "Mesh")
    open_listed(page, "platen_warmup.toml")
    page.wait_for_selector("#hs-fact-unit >> text=from platen_warmup.toml", timeout=30_000)
    page.wait_for_selector("#hs-probe-error", state="detached", timeout=15_000)


def test_results_in_a_1280_by_800_window_keep_a_usable_scrubber_units_and_the_note(page, shots_dir):
    page.set_viewport_size({"width": 1280, "height": 800})
    open_section(page, "Start and time")
    fill(page, "#hs-end", 200)
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    page.click("#hs-run")
    page.wait_for_selector("#hs-progress-text >> text=complete", timeout=60_000)
    page.wait_for_selector("#hs-range-unit >> text=°C", timeout=15_000)
    scrub = page.locator("#hs-player .v-slider").first.bounding_box()
    assert scrub["width"] >= 200, scrub
    note = page.locator("#hs-disclaimer")
    assert note.is_visible() and "engineering estimates" in note.inner_text()
    box = note.bounding_box()
    assert box["y"] + box["height"] <= 800 and box["x"] + box["width"] <= 1280  # seen without scrolling
    page.screenshot(path=str(shots_dir / "round3-1280x800.png"))


@pytest.mark.parametrize("case", ["lblock_cooling.toml", "platen_p2_cycling.toml"])
def test_a_demo_case_opens_ready_to_run_and_exports_what_the_forms_do_not_edit(page, data_dir, case, tmp_path):
    """A conductivity tensor, a named theta, start_steps, the title and material labels survive the UI."""
    open_section(page, "Mesh")
    open_listed(page, case)
    page.wait_for_selector(f"#hs-fact-unit >> text=from {case}", timeout=30_000)
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    assert page.locator("#hs-run-reason").count() == 0
    with page.expect_download() as dl:
        page.click("#hs-export-case")
    dl.value.save_as(tmp_path / case)
    given, exported = (tomllib.loads(p.read_text()) for p in (data_dir / case, tmp_path / case))
    assert exported["title"] == given["title"]
    for key, value in given["time"].items():
        assert exported["time"][key] == value, key
    regions = list(exported["material"])
    for name, material in given["material"].items():
        for region in (regions if name == "*" else [name]):
            if name == "*" and region in given["material"]:
                continue
            for key, value in material.items():
                assert exported["material"][region][key] == value, (region, key)


@pytest.fixture(scope="module")
def shots_dir(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("ui-round3-shots")
