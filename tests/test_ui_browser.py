"""The browser UI driven in headless chromium: set up, run, animate, probe, export, errors.

One ``heatsoak ui`` server (a subprocess on a free loopback port) serves every
test in this file, in order. Screenshots go to $HEATSOAK_UI_SHOTS or a pytest
temporary folder; the path is printed.
"""

from __future__ import annotations

import csv
import shutil
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import numpy as np
import pytest
from uidriver import (
    DEMO,
    MESHES,
    browse,
    choose,
    discard_if_asked,
    fill,
    open_listed,
    open_section,
    require_browser,
    select_group,
    serve,
    set_condition,
    settle,
    view_pixels,
    wait_for,
)

pytestmark = pytest.mark.browser
playwright_api = require_browser()


#: An ASCII STL: a single triangle, a mesh with no tetrahedra.
FLAT_STL = """solid flat
facet normal 0 0 1
outer loop
vertex 0 0 0
vertex 1 0 0
vertex 0 1 0
endloop
endfacet
endsolid flat
"""


@pytest.fixture(scope="module")
def data_dir(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("ui-data")
    for path in MESHES.iterdir():
        if path.suffix in (".toml", ".msh", ".vtu", ".csv"):
            shutil.copy(path, folder / path.name)
    (folder / "flat.stl").write_text(FLAT_STL)
    return folder


@pytest.fixture(scope="module")
def server(data_dir, shots):
    yield from serve(data_dir / DEMO.name, data_dir, shots)


@pytest.fixture(scope="module")
def page(server):
    yield from browse(server)


def inside_point(case_dir: Path, case_name: str) -> list:
    """A point well inside the demo mesh, in the mesh's unit (the centroid of its largest element)."""
    from heatsoak.core.case.casefile import load_case
    from heatsoak.core.mesh.read import UNITS

    case = load_case(case_dir / case_name)
    m = case.mesh
    corners = m.points[m.cells[:, :4]]
    vol = np.abs(np.einsum("ij,ij->i", corners[:, 1] - corners[:, 0],
                           np.cross(corners[:, 2] - corners[:, 0], corners[:, 3] - corners[:, 0])))
    return (corners[np.argmax(vol)].mean(axis=0) / UNITS[case.unit]).round(4).tolist()


def frame_number(page) -> int:
    text = page.inner_text("#hs-frame-time")
    return int(text.split("frame ")[1].split(" of")[0]) if "frame" in text else 0


def read_probe_csv(path) -> dict:
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    body = np.array(rows[1:], dtype=float)
    return {name: body[:, i] for i, name in enumerate(rows[0])}


def test_ramp_run_animate_probe_and_export_match_the_cli(page, server, data_dir, shots, tmp_path):
    group = "base"
    set_condition(page, group, "Temperature (Dirichlet)", "ramp", dict(start=22, end=150, at=0, over=120))
    open_section(page, "Start and time")
    fill(page, "#hs-end", 240)
    fill(page, "#hs-step", 20)
    fill(page, "#hs-every", 1)
    x, y, z = inside_point(data_dir, DEMO.name)
    open_section(page, "Probes")
    for key, value in (("name", "T1"), ("x", x), ("y", y), ("z", z), ("threshold", 40)):
        fill(page, f"#hs-p-{key}", value)
    page.click("#hs-add-probe")
    page.wait_for_selector("#hs-probe-list >> text=T1")
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    page.screenshot(path=str(shots / "1-setup.png"))

    page.click("#hs-run")
    wait_for(lambda: "complete" in page.inner_text("#hs-progress-text"), 90, what="the run to complete")
    page.wait_for_selector("#hs-player")
    assert "solver direct" in page.inner_text("#hs-progress-text")  # a small mesh: the exact solver
    assert "unknowns" in page.locator("#hs-solver-why").get_attribute("title")
    wait_for(lambda: page.locator("#hs-progress").get_attribute("aria-valuenow") in ("100", "100.0"), 15,
             what="the progress bar to reach 100")
    page.wait_for_selector("#hs-frame-time >> text=frame 1 of")
    time.sleep(1.0)
    early = view_pixels(page, shots / "2-early-frame.png")

    page.click("#hs-play")
    wait_for(lambda: frame_number(page) >= 10, 30, what="playback to reach frame 10")
    page.click("#hs-play")  # pause
    time.sleep(1.0)
    late = view_pixels(page, shots / "3-late-frame.png")
    page.screenshot(path=str(shots / "4-results.png"))
    # The body warms from the initial temperature: the colour-mapped pixels change a lot.
    assert np.abs(late - early).mean() > 5.0
    assert np.abs(late.mean(axis=(0, 1)) - early.mean(axis=(0, 1))).max() > 5.0

    row = page.locator("#hs-probe-values .hs-probe-row", has_text="T1").first
    ui_last = float(row.locator(".hs-last").inner_text())

    with page.expect_download() as dl:
        page.click("#hs-export-probes")
    dl.value.save_as(tmp_path / "ui-probes.csv")
    with page.expect_download() as dl:
        page.click("#hs-export-bundle")
    dl.value.save_as(tmp_path / "bundle.zip")
    with zipfile.ZipFile(tmp_path / "bundle.zip") as z:
        z.extractall(tmp_path / "bundle")

    out = tmp_path / "cli-results"
    done = subprocess.run([sys.executable, "-m", "heatsoak.core.app.cli", "run", str(tmp_path / "bundle" / "case.toml"),
                           "--out", str(out), "--quiet"], capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr
    ui, cli = read_probe_csv(tmp_path / "ui-probes.csv"), read_probe_csv(out / "probes.csv")
    assert set(ui) == set(cli) and "T1" in ui
    for name in ui:
        np.testing.assert_allclose(ui[name], cli[name], rtol=1e-9, atol=1e-9)
    assert abs(ui_last - cli["T1"][-1]) < 1e-3


def test_bad_table_is_marked_at_the_field_without_traceback(page, server, shots):
    set_condition(page, "base", "Temperature (Dirichlet)", "table")
    fill(page, "#hs-table", "0, 20\n100, 50\n50, 80")
    message = page.locator(".hs-editor .v-messages__message", has_text="does not increase")
    message.wait_for(timeout=15_000)
    assert "50" in message.inner_text()
    page.wait_for_selector("#hs-run[disabled]", timeout=15_000)
    page.wait_for_selector("#hs-run-reason >> text=does not increase", timeout=15_000)
    page.screenshot(path=str(shots / "5-bad-table.png"))
    open_section(page, "Start and time")
    fill(page, "#hs-step", 1e9)
    step_field = page.locator("#hs-step").locator("xpath=ancestor::div[contains(@class,'v-input')]").first
    step_field.locator(".v-messages__message", has_text="must be <=").wait_for(timeout=15_000)
    fill(page, "#hs-step", 20)
    open_section(page, "Materials")
    fill(page, "#hs-density", -5)
    density_field = page.locator("#hs-density").locator("xpath=ancestor::div[contains(@class,'v-input')]").first
    density_field.locator(".v-messages__message", has_text="must be > 0").wait_for(timeout=15_000)
    page.screenshot(path=str(shots / "5b-bad-density.png"))
    fill(page, "#hs-density", 7900)
    assert "Traceback" not in page.content()
    assert "Traceback" not in server.log()


def test_mesh_without_tetrahedra_gives_a_clear_message(page, server, shots):
    open_listed(page, "flat.stl")
    alert = page.locator("#hs-mesh-error")
    alert.wait_for(timeout=15_000)
    text = alert.inner_text()
    assert "no tetrahedra" in text and "flat.stl" in text
    assert "Traceback" not in page.content()
    page.screenshot(path=str(shots / "6-no-tetrahedra.png"))


def test_what_if_runs_are_labelled_compared_and_differenced(page, server, shots):
    set_condition(page, "base", "Temperature (Dirichlet)", "ramp", dict(start=22, end=150, at=0, over=240))
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    page.click("#hs-run")
    wait_for(lambda: page.locator(".hs-run-row").count() >= 2, 90, what="a second run")
    label = page.locator(".hs-run-row").nth(1).inner_text()
    assert "base ramp over 120 s -> 240 s" in label
    # Overlay both runs' curves: the probe table lists each probe once per run.
    page.locator(".hs-run-row").nth(0).locator("input[type=checkbox]").check()
    wait_for(lambda: page.locator("#hs-probe-values .hs-probe-row", has_text="T1").count() == 2, 15,
             what="curves of both runs")
    choose(page, "#hs-diff", "minus run 1")
    page.click("#hs-next")
    settle(page, 1000)
    page.screenshot(path=str(shots / "7-difference.png"))
    low, high = (float(v) for v in page.inner_text("#hs-range").split(" … "))
    assert low == pytest.approx(-high) and high > 1.0  # a symmetric range around zero difference
    page.locator("#hs-clip").check()
    settle(page, 1500)
    page.screenshot(path=str(shots / "8-clipped.png"))
    assert "Traceback" not in server.log()


def test_cancel_keeps_the_steps_done(page, server):
    page.click("#hs-view-mode button:has-text('set-up')")
    open_section(page, "Start and time")
    fill(page, "#hs-end", 200000)
    fill(page, "#hs-step", 2)
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    page.click("#hs-run")
    page.wait_for_selector("#hs-cancel")
    wait_for(lambda: page.inner_text("#hs-progress-text").startswith("stepping · step")
             and "s left" in page.inner_text("#hs-progress-text"), 30, what="progress with an estimate of the time left")
    page.click("#hs-cancel")
    wait_for(lambda: "cancelled" in page.inner_text("#hs-progress-text"), 30, what="the run to stop")
    steps = int(page.inner_text("#hs-progress-text").split(": ")[1].split(" steps")[0])
    assert 0 < steps < 100_000
    row = page.locator(".hs-run-row").last
    wait_for(lambda: "cancelled" in row.inner_text(), 15, what="the run list to mark the run cancelled")
    assert "time step 20 s -> 2 s" in row.inner_text()


def test_picture_and_animation_export(page, tmp_path):
    import imageio.v3 as iio

    page.locator(".hs-run-row").first.locator("button .mdi-eye-outline").click()
    choose(page, "#hs-diff", "temperature")
    with page.expect_download() as dl:
        page.click("#hs-export-png")
    dl.value.save_as(tmp_path / "view.png")
    assert iio.imread(tmp_path / "view.png").shape[0] > 100
    with page.expect_download(timeout=60_000) as dl:
        page.click("#hs-export-movie")
    dl.value.save_as(tmp_path / "animation.gif")
    frames = iio.imread(tmp_path / "animation.gif", index=None)
    assert frames.shape[0] > 2 and np.abs(frames[-1].astype(float) - frames[0]).mean() > 1.0


def test_clicking_the_view_selects_a_group_and_places_a_probe(page, shots):
    page.click("#hs-view-mode button:has-text('set-up')")
    select_group(page, "bore")
    page.locator("#hs-pick-mode button", has_text="select surface").click()
    view = page.locator(".hs-view")
    box = view.bounding_box()
    # On the top face, beside the bore (the set-up camera looks down on the top at an angle).
    spot = {"x": box["width"] * 0.62, "y": box["height"] * 0.42}
    view.click(position=spot)
    page.wait_for_selector("#hs-editor >> text=Condition on top", timeout=15_000)
    open_section(page, "Probes")
    before = page.locator("#hs-probe-list tbody tr").count()
    page.locator("#hs-pick-mode button", has_text="place probe").click()
    settle(page)
    view.click(position=spot)
    wait_for(lambda: page.locator("#hs-probe-list tbody tr").count() == before + 1, 15, what="a probe from a click")
    page.screenshot(path=str(shots / "9-picked.png"))


def test_untagged_mesh_is_split_by_the_feature_angle(page, shots):
    open_section(page, "Mesh")
    open_listed(page, "lblock.vtu")
    page.wait_for_selector("#hs-facts >> text=lblock.vtu", timeout=30_000)
    settle(page, 1000)
    sharp = page.locator(".hs-group").count()
    fill(page, "#hs-angle", 100)
    wait_for(lambda: page.locator(".hs-group").count() < sharp, 30, what="fewer groups at a wider angle")
    assert sharp > 1
    page.screenshot(path=str(shots / "10-untagged.png"))


def test_an_uploaded_mesh_is_opened(page, data_dir, tmp_path):
    upload = tmp_path / "uploaded part.vtu"
    shutil.copy(data_dir / "lblock.vtu", upload)
    open_section(page, "Mesh")
    page.set_input_files("#hs-upload", str(upload))
    discard_if_asked(page)
    page.wait_for_selector("#hs-facts >> text=uploaded_part.vtu", timeout=30_000)
    assert page.locator(".hs-group").count() >= 1
