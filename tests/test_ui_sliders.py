"""The sliders of the set-up in a real browser, without a run: a drag edits the number beside it and
the schedule preview (a region's heat source here; the live what-if with sliders is in test_ui_whatif.py).
"""

from __future__ import annotations

import pytest
from uidriver import demo_data, drag_slider, edits_sent, open_section, require_browser, settle

pytestmark = pytest.mark.browser
playwright_api = require_browser()


data_dir = demo_data("sliders-ui")


def test_dragging_a_heat_source_ramp_slider_sets_the_number_within_its_range(page, tmp_path):
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    open_section(page, "Materials")
    page.locator("#hs-src-shape button", has_text="ramp").click()
    settle(page)
    before = float(page.input_value("#hs-src-ramp-end"))
    drag_slider(page, "#hs-src-ramp-end-slider", 1.0, steps=8, seconds=0.5)
    edits_sent(page)
    low, high, step = page.evaluate("() => trame.state.get('hs_src_ranges').end")
    value = float(page.input_value("#hs-src-ramp-end"))
    assert value == high > before  # dragged to the top of the range, which lies above the old value
    assert page.evaluate("() => trame.state.get('hs_m_source_end')") == value
    page.locator("#hs-src-ramp").screenshot(path=str(tmp_path / "source-sliders.png"))
