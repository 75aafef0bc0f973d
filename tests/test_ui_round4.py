"""The browser UI, round 4: a heat source per region, probe notes, material labels, and no set-up lost
by opening another file.

One ``heatsoak ui`` server serves every test in this file, in order.
"""

from __future__ import annotations

import csv
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import numpy as np
import pytest
import tomllib
from uidriver import (
    DEMO,
    choose,
    copy_demo_files,
    field_message,
    fill,
    open_section,
    require_browser,
    run_and_wait,
    wait_for,
)

pytestmark = pytest.mark.browser
playwright_api = require_browser()

#: The heat source set on the platen region [W/m³] and the end time of the runs [s].
SOURCE, END = 1e6, 200.0


@pytest.fixture(scope="module")
def data_dir(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("ui-round4-data")
    copy_demo_files(folder, ("platen_warmup.toml", "platen.msh", "platen_base.csv", "lblock.vtu", "lblock_cooling.toml"))
    # the demo with a ramped source in the sleeve, as a case file gives it
    text = DEMO.read_text()
    assert "label = \"stainless steel" in text
    ramp = "source = { ramp = { start = 0, end = 5e5, at = 60, over = 120 } }\n"
    (folder / "sourced.toml").write_text(text.replace("label = \"stainless steel", ramp + "label = \"stainless steel", 1))
    return folder


@pytest.fixture(scope="module")
def shots(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("ui-round4-shots")


def read_probe_csv(path) -> dict:
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    body = np.array(rows[1:], dtype=float)
    return {name: body[:, i] for i, name in enumerate(rows[0])}


def download(page, button: str, path: Path) -> Path:
    with page.expect_download() as dl:
        page.click(button)
    dl.value.save_as(path)
    return path


def to_setup(page) -> None:
    setup_view = page.locator("#hs-view-mode button:has-text('set-up')")
    if setup_view.count():
        setup_view.click()


def test_a_heat_source_on_a_region_warms_it_is_exported_and_runs_alike_in_the_cli(page, data_dir, shots, tmp_path):
    import meshio

    open_section(page, "Start and time")
    fill(page, "#hs-end", END)
    run_and_wait(page, 0)
    cold = read_probe_csv(download(page, "#hs-export-probes", tmp_path / "no-source.csv"))

    to_setup(page)
    open_section(page, "Materials")
    choose(page, "#hs-region", "platen")
    page.locator("#hs-src-shape button", has_text="constant").click()
    fill(page, "#hs-src-value", "lots")
    field_message(page, "#hs-src-value", "'lots' is not a number")
    page.wait_for_selector("#hs-run[disabled]", timeout=15_000)
    fill(page, "#hs-src-value", SOURCE)
    page.locator(".hs-section", has_text="Materials").first.screenshot(path=str(shots / "source.png"))
    run_and_wait(page, 1)
    hot = read_probe_csv(download(page, "#hs-export-probes", tmp_path / "source.csv"))

    # The difference u of the two runs solves rho c du/dt = div(k grad u) + q (q in the platen only), u = 0 at
    # the start and on the Dirichlet faces (bore, base), k du/dn + h u = 0 on the convective ones. By the
    # comparison (maximum) principle (Evans, Partial Differential Equations, 2nd ed., §2.3.3 and §7.1.4, from
    # memory) u >= 0 and u stays below two supersolutions: q t / (rho c)_platen (the sleeve's rho c is larger) and
    # the plane wall with generation, cooled base, insulated top, q (2 L z - z^2) / (2 k) (Incropera et al., 6th
    # ed., §3.5, from memory; the sleeve spans the full height, so its vertical faces carry no jump in k du/dz).
    case = tomllib.loads(download(page, "#hs-export-case", tmp_path / "case.toml").read_text())
    platen, sleeve = case["material"]["platen"], case["material"]["sleeve"]
    assert platen["source"] == SOURCE and "source" not in sleeve
    rho_c = platen["density"] * platen["specific_heat"]
    assert sleeve["density"] * sleeve["specific_heat"] >= rho_c
    height = np.ptp(meshio.read(data_dir / "platen.msh").points[:, 2]) / 1000  # mm -> m
    for probe in case["probe"]:
        name, z = probe["name"], probe["at"][2] / 1000
        wall = SOURCE * (2 * height * z - z**2) / (2 * platen["conductivity"])
        rise = hot[name] - cold[name]
        assert np.all(rise >= -1e-9) and np.all(rise <= SOURCE * cold["time"] / rho_c + 1e-6), name
        assert rise[-1] <= 1.01 * wall, name
        if name == "top-mid":  # far from the bore and rim the wall's value is nearly reached
            assert rise[-1] > 0.8 * wall

    # The exported bundle run by the CLI gives the UI's numbers.
    download(page, "#hs-export-bundle", tmp_path / "bundle.zip")
    with zipfile.ZipFile(tmp_path / "bundle.zip") as z:
        z.extractall(tmp_path / "bundle")
    done = subprocess.run([sys.executable, "-m", "heatsoak.core.app.cli", "run", str(tmp_path / "bundle" / "case.toml"),
                           "--out", str(tmp_path / "cli"), "--quiet"], capture_output=True, text=True, timeout=120,
                          check=False)
    assert done.returncode == 0, done.stderr
    cli = read_probe_csv(tmp_path / "cli" / "probes.csv")
    assert set(cli) == set(hot)
    for name in hot:
        np.testing.assert_allclose(hot[name], cli[name], rtol=1e-9, atol=1e-9)


def test_a_source_from_a_case_is_shown_checked_at_its_field_and_exported(page, tmp_path):
    to_setup(page)
    open_section(page, "Mesh")
    page.locator(".hs-file", has_text="sourced.toml").click()
    page.wait_for_selector("#hs-fact-unit >> text=from sourced.toml", timeout=30_000)
    open_section(page, "Materials")
    choose(page, "#hs-region", "sleeve")
    page.wait_for_selector("#hs-src-ramp", timeout=15_000)
    assert [float(page.locator(f"#hs-src-ramp-{k}").input_value()) for k in ("start", "end", "at", "over")] == [
        0.0, 5e5, 60.0, 120.0]
    fill(page, "#hs-src-ramp-over", -5)
    field_message(page, "#hs-src-ramp-over", "-5")
    page.wait_for_selector("#hs-run-reason >> text=material.sleeve.source", timeout=15_000)
    fill(page, "#hs-src-ramp-over", 90)
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    case = tomllib.loads(download(page, "#hs-export-case", tmp_path / "case.toml").read_text())
    assert case["material"]["sleeve"]["source"] == {"ramp": {"start": 0.0, "end": 5e5, "at": 60.0, "over": 90.0}}
    assert "source" not in case["material"]["platen"]
    assert case["material"]["sleeve"]["label"].startswith("stainless steel")  # the label still holds


def test_a_case_material_label_and_a_conductivity_tensor_are_shown_whole(page, data_dir, shots):
    open_section(page, "Mesh")
    page.locator(".hs-file", has_text="lblock_cooling.toml").click()
    page.wait_for_selector("#hs-fact-unit >> text=from lblock_cooling.toml", timeout=30_000)
    open_section(page, "Materials")
    given = tomllib.loads((data_dir / "lblock_cooling.toml").read_text())["material"]["region"]
    title = page.locator("#hs-preset-title")
    wait_for(lambda: title.inner_text() == given["label"], 15, what="the case's label in the material selector")
    field = page.locator("#hs-k")
    text = field.input_value()
    assert [[float(v) for v in row.strip(" [],").split(",")] for row in text.splitlines()] == given["conductivity"]
    for box in (title, field):  # nothing cut off: the whole text fits its box
        assert box.evaluate("e => e.scrollWidth <= e.clientWidth + 1"), box
    page.locator(".hs-section", has_text="Materials").first.screenshot(path=str(shots / "label-tensor.png"))
    # Spacing typed into the tensor is no change of value: the label still describes it.
    fill(page, "#hs-k", text.replace("\n", " "))
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    assert title.inner_text() == given["label"]


def test_a_probe_typed_just_outside_the_surface_shows_where_it_is_read(page, data_dir, shots):
    import meshio

    top = meshio.read(data_dir / "lblock.vtu").points[:, 2].max()  # the flat top face, z = top [m]
    open_section(page, "Probes")
    for key, value in (("name", "lid"), ("x", 0.095), ("y", 0.005), ("z", f"{top + 0.0002:g}")):
        fill(page, f"#hs-p-{key}", value)
    page.click("#hs-add-probe")
    row = page.locator("#hs-probe-list tr.hs-probe-note", has_text="lid")
    row.wait_for(timeout=15_000)
    # The nearest point of a flat face is the foot of the perpendicular: straight down onto z = top.
    assert "lies 0.0002 m outside the mesh surface" in row.inner_text()
    assert f"nearest surface point (0.095, 0.005, {top:g}) m" in row.inner_text()
    page.locator(".hs-section", has_text="Probes").first.screenshot(path=str(shots / "probe-note.png"))
    # Probes inside get no note; moving this one inside clears its note.
    assert page.locator("#hs-probe-list tr.hs-probe-note").count() == 1
    fill(page, "#hs-p-name", "lid")
    fill(page, "#hs-p-z", f"{top - 0.001:g}")
    page.click("#hs-add-probe")
    page.wait_for_selector("#hs-probe-list tr.hs-probe-note", state="detached", timeout=15_000)
    assert page.locator("#hs-probe-list tbody tr", has_text="lid").count() == 1


def guard_shown(page) -> bool:
    return page.locator("#hs-guard").is_visible()


def open_file(page, name: str) -> None:
    open_section(page, "Mesh")
    page.locator(".hs-file", has_text=name).click()


def test_opening_another_file_asks_first_when_the_set_up_has_changes(page, shots):
    # The probe added above is a change not yet run or exported.
    open_file(page, "platen_warmup.toml")
    page.wait_for_selector("#hs-guard", timeout=15_000)
    text = page.inner_text("#hs-guard")
    assert "lblock_cooling.toml" in text and "platen_warmup.toml" in text and "not run or exported" in text
    page.wait_for_timeout(400)  # the dialog fades in
    page.screenshot(path=str(shots / "guard.png"))
    page.click("#hs-guard-keep")
    page.wait_for_selector("#hs-guard", state="detached", timeout=15_000)
    assert page.locator("#hs-fact-unit", has_text="from lblock_cooling.toml").count() == 1
    open_section(page, "Probes")
    assert page.locator("#hs-probe-list tbody tr", has_text="lid").count() == 1  # the edit is still there
    # Asked again, the user lets the changes go.
    open_file(page, "platen_warmup.toml")
    page.click("#hs-guard-open")
    page.wait_for_selector("#hs-fact-unit >> text=from platen_warmup.toml", timeout=30_000)
    page.wait_for_selector("#hs-guard", state="hidden", timeout=15_000)


def test_no_question_when_nothing_changed_since_opening_running_or_exporting(page, tmp_path):
    open_file(page, "lblock_cooling.toml")  # nothing changed since the demo was opened
    page.wait_for_selector("#hs-fact-unit >> text=from lblock_cooling.toml", timeout=30_000)
    assert not guard_shown(page)
    open_section(page, "Start and time")
    fill(page, "#hs-end", 120)  # a change, then a run of it
    run_and_wait(page, len(page.locator(".hs-run-row").all()))
    to_setup(page)
    open_file(page, "platen_warmup.toml")
    page.wait_for_selector("#hs-fact-unit >> text=from platen_warmup.toml", timeout=30_000)
    assert not guard_shown(page)
    open_section(page, "Start and time")
    fill(page, "#hs-initial", 30)  # a change, then an export of it
    download(page, "#hs-export-case", tmp_path / "case.toml")
    open_file(page, "lblock_cooling.toml")
    page.wait_for_selector("#hs-fact-unit >> text=from lblock_cooling.toml", timeout=30_000)
    assert not guard_shown(page)


def test_an_upload_asks_first_too_and_keeping_clears_the_upload_field(page, data_dir, tmp_path):
    open_section(page, "Start and time")
    fill(page, "#hs-initial", 35)
    upload = tmp_path / "other.vtu"
    shutil.copy(data_dir / "lblock.vtu", upload)
    open_section(page, "Mesh")
    page.set_input_files("#hs-upload", str(upload))
    page.wait_for_selector("#hs-guard >> text=Open other.vtu?", timeout=30_000)
    page.click("#hs-guard-keep")
    page.wait_for_selector("#hs-guard", state="detached", timeout=15_000)
    wait_for(lambda: page.locator("#hs-upload").input_value() == "", 15, what="the upload field to clear")
    assert page.locator("#hs-fact-unit", has_text="from lblock_cooling.toml").count() == 1
    open_section(page, "Start and time")
    assert float(page.locator("#hs-initial").input_value()) == 35


def test_run_pressed_straight_after_typing_runs_what_was_typed(page):
    """The press must not overtake an edit the browser has not yet sent to the server."""
    open_section(page, "Start and time")
    step = float(page.locator("#hs-step").input_value())
    end = float(page.locator("#hs-end").input_value())
    new_end = 2 * step if end != 2 * step else 3 * step
    runs = page.locator(".hs-run-row").count()
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    type_and_click(page, {"#hs-end": new_end}, "#hs-run")
    wait_for(lambda: page.locator(".hs-run-row").count() > runs, 90, what="the run to be listed")
    page.wait_for_selector("#hs-progress-text >> text=complete", timeout=60_000)
    assert f"t = {new_end:g} s" in page.inner_text("#hs-progress-text")


def test_export_pressed_straight_after_typing_saves_what_was_typed(page, tmp_path):
    """The case file holds an edit the browser had not yet sent when Export was pressed."""
    open_section(page, "Start and time")
    initial = float(page.locator("#hs-initial").input_value()) + 7.5
    with page.expect_download() as dl:
        type_and_click(page, {"#hs-initial": initial}, "#hs-export-case")
    case = tomllib.loads(Path(dl.value.path()).read_text())
    assert case["initial"]["temperature"] == initial


def type_and_click(page, values: dict, button: str) -> None:
    """Type ``values`` ({input selector: value}) and press ``button`` in one browser task, giving the
    browser no time to send the edits first."""
    page.evaluate(
        """([values, button]) => {
            for (const [selector, value] of Object.entries(values)) {
                const input = document.querySelector(selector);
                input.value = String(value);
                input.dispatchEvent(new Event('input', {bubbles: true}));
            }
            document.querySelector(button).click();
        }""",
        [values, button],
    )


def test_a_file_clicked_straight_after_an_edit_still_asks_first(page):
    open_section(page, "Start and time")
    initial = float(page.locator("#hs-initial").input_value()) + 2.5
    open_section(page, "Mesh")
    page.locator(".hs-file", has_text="platen_warmup.toml").first.evaluate("e => e.setAttribute('id', 'hs-test-file')")
    type_and_click(page, {"#hs-initial": initial}, "#hs-test-file")
    page.wait_for_selector("#hs-guard", timeout=15_000)
    page.click("#hs-guard-keep")
    page.wait_for_selector("#hs-guard", state="detached", timeout=15_000)
    assert page.locator("#hs-fact-unit", has_text="from lblock_cooling.toml").count() == 1
    assert float(page.locator("#hs-initial").input_value()) == initial


def test_a_probe_added_straight_after_typing_has_the_typed_position(page, data_dir):
    import meshio

    top = meshio.read(data_dir / "lblock.vtu").points[:, 2].max()
    open_section(page, "Probes")
    fill(page, "#hs-p-name", "")
    type_and_click(page, {"#hs-p-name": "quick", "#hs-p-x": 0.0925, "#hs-p-y": 0.0075, "#hs-p-z": top - 0.0015},
                   "#hs-add-probe")
    row = page.locator("#hs-probe-list tbody tr", has_text="quick")
    row.wait_for(timeout=15_000)
    assert "0.0925" in row.inner_text() and "0.0075" in row.inner_text()
