"""The browser UI shows the estimated time-step error beside the probe curves and warns when it is
larger than a probe's margin to its threshold.

One ``heatsoak ui`` server serves both tests, in order.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
import tomllib
from heatsoak.core.app.runner import run_case
from heatsoak.core.case.casefile import load_case
from uidriver import DEMO, copy_demo_files, open_listed, open_section, require_browser, wait_for

pytestmark = pytest.mark.browser
playwright_api = require_browser()


@pytest.fixture(scope="module")
def headless(tmp_path_factory) -> tuple:
    """The demo run headless: (summary, results folder)."""
    folder = copy_demo_files(tmp_path_factory.mktemp("time-error-cli"),
                             ("platen_warmup.toml", "platen.msh", "platen_base.csv"))
    return run_case(load_case(folder / DEMO.name), folder / "out"), folder / "out"


@pytest.fixture(scope="module")
def data_dir(tmp_path_factory, headless) -> Path:
    """The demo with a threshold on the rim probe 0.1 mK above the highest temperature it reaches."""
    with open(headless[1] / "probes.csv", newline="") as f:
        rim_max = max(float(row["rim"]) for row in csv.DictReader(f))
    folder = copy_demo_files(tmp_path_factory.mktemp("time-error-data"), ("platen.msh", "platen_base.csv"))
    probe = 'name = "rim"\nat = [55.0, 0.0, 10.0]\n'
    text = DEMO.read_text()
    assert probe in text
    (folder / DEMO.name).write_text(text.replace(probe, f"{probe}threshold = {rim_max + 1e-4!r}\n"))
    # the demo asking for a tolerance instead of a step
    assert "\nstep = 20\n" in text
    (folder / "adaptive.toml").write_text(text.replace("\nstep = 20\n", "\ntolerance = 0.05\n"))
    return folder


def test_the_time_step_error_is_shown_beside_the_probe_curves_and_warns_on_a_thin_margin(page, headless, tmp_path):
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    page.click("#hs-run")
    wait_for(lambda: "complete" in page.inner_text("#hs-progress-text"), 90, what="the run to complete")
    line = page.locator("#hs-time-error")
    line.wait_for(timeout=15_000)
    # the same case headless: the same largest estimate at the probes, to the two digits shown
    largest = max(headless[0]["time_error"].values())
    assert line.inner_text() == f"time-step error at most {largest:.2g} K at the probes"
    warning = page.locator("#hs-time-error-warn")
    warning.wait_for(timeout=15_000)
    assert "probe rim" in warning.inner_text() and "not reached" in warning.inner_text()
    assert "top-mid" not in warning.inner_text()  # crossed by far more than its error
    page.locator("#hs-curves").screenshot(path=str(tmp_path / "curves.png"))


def test_a_case_with_a_tolerance_keeps_it_through_the_ui_and_runs_adaptive_steps(page, data_dir, tmp_path):
    open_section(page, "Mesh")
    open_listed(page, "adaptive.toml")
    page.wait_for_selector("#hs-fact-unit >> text=from adaptive.toml", timeout=30_000)
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    with page.expect_download() as dl:
        page.click("#hs-export-case")
    dl.value.save_as(tmp_path / "exported.toml")
    time = tomllib.loads((tmp_path / "exported.toml").read_text())["time"]
    assert time["tolerance"] == 0.05 and time["step"] == 3600 / 32  # the largest step the run takes
    page.click("#hs-run")
    wait_for(lambda: "adaptive steps, tolerance 0.05 K" in page.inner_text("#hs-time-error"), 90,
             what="the adaptive run's error line")
