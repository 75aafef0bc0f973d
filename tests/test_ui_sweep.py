"""The sweep form in a real browser: two values of the convection coefficient run on the sweep engine, the
table fills, both variants are kept as runs and ticked for the curves; bad values name the number.

One ``heatsoak ui`` server serves the whole module, in order.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from uidriver import DEMO, copy_demo_files, require_browser, settle, wait_for

pytestmark = pytest.mark.browser
playwright_api = require_browser()
pytest.importorskip("distributed")


@pytest.fixture(scope="module")
def data_dir(tmp_path_factory) -> Path:
    return copy_demo_files(tmp_path_factory.mktemp("sweep-ui"), (DEMO.name, "platen.msh", "platen_base.csv"))


def _state(page, key):
    return page.evaluate(f"() => trame.state.get('{key}')")


def _pick(page, slot: int, key: str, values: str) -> None:
    if _state(page, f"hs_sweep_key_{slot}") != key:
        page.locator(f"#hs-sweep-key-{slot}").fill(key)
        page.get_by_role("option", name=key, exact=True).first.click()
    page.locator(f"#hs-sweep-values-{slot}").fill(values)
    page.locator(f"#hs-sweep-values-{slot}").dispatch_event("change")
    settle(page, 400)


def test_bad_values_name_the_number(page):
    page.click("#hs-sweep-open")
    page.wait_for_selector("#hs-sweep-card", timeout=10_000)
    keys = wait_for(lambda: _state(page, "hs_sweep_keys"), 10, what="the numbers of the set-up")
    assert {"boundary.rim.h", "material.platen.conductivity", "time.step"} <= set(keys)
    assert not [k for k in keys if k.startswith(("mesh.", "output."))]
    _pick(page, 0, "boundary.rim.h", "5, two words")
    page.click("#hs-sweep-start")
    page.wait_for_selector("#hs-sweep-error", timeout=10_000)
    assert "boundary.rim.h" in page.inner_text("#hs-sweep-error")
    assert not _state(page, "hs_sweep_running")


def test_a_sweep_fills_its_table_and_keeps_its_variants_as_runs(page, tmp_path):
    runs_before = len(_state(page, "hs_runs"))
    _pick(page, 0, "boundary.rim.h", "5, 50")
    page.click("#hs-sweep-start")
    wait_for(lambda: _state(page, "hs_sweep_running"), 10, what="the sweep to start")
    wait_for(lambda: not _state(page, "hs_sweep_running"), 240, what="the sweep to end")
    assert not page.locator("#hs-sweep-error").count()
    rows = _state(page, "hs_sweep_rows")
    assert sorted(r["boundary.rim.h"] for r in rows) == [5, 50]
    assert {r["status"] for r in rows} == {"complete"} and {r["model"] for r in rows} == {"full"}
    assert "2 complete" in page.inner_text("#hs-sweep-text")
    table = page.inner_text("#hs-sweep-table")
    assert "sleeve.max" in table and "boundary.rim.h" in table
    low, high = sorted(rows, key=lambda r: r["boundary.rim.h"])
    assert high["rim.end"] < low["rim.end"]  # more convection at the rim keeps the rim cooler
    page.screenshot(path=str(tmp_path / "sweep.png"))
    runs = _state(page, "hs_runs")
    assert len(runs) == runs_before + 2
    assert {r["id"] for r in runs[-2:]} <= set(_state(page, "hs_compare"))
    page.click("#hs-sweep-close")
