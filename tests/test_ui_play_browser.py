"""Playback in the browser shows prepared pictures at the pace asked, and hands over to the live
view on pause. Headless chromium on ``heatsoak ui`` with the demo case."""

from __future__ import annotations

import time

import numpy as np
import pytest
from uidriver import demo_data, require_browser, run_and_wait, settle, state, view_pixels, wait_for

pytestmark = pytest.mark.browser
playwright_api = require_browser()

data_dir = demo_data("play-ui")

#: Pictures a second the page must show when 10 are asked (some slack for a shared machine).
LEAST_FPS = 6.0

COUNT_PICTURES = """() => {
  window.hsPictures = [];
  new MutationObserver(() => {
    const img = document.querySelector('#hs-picture');
    if (img) window.hsPictures.push([performance.now(), img.getAttribute('src').length]);
  }).observe(document.body, {subtree: true, attributes: true, attributeFilter: ['src'], childList: true});
}"""


def test_play_shows_prepared_pictures_at_the_pace_asked(page, shots):
    run_and_wait(page, 0)
    n = state(page, "hs_n_frames")
    assert n > 20  # the demo writes enough frames to time the pace
    page.evaluate("() => trame.state.set('hs_speed', 10)")
    settle(page)
    page.click("#hs-play")
    page.wait_for_selector("#hs-picture", timeout=60_000)  # the first picture is ready
    # the worker renders ahead; once it is done every frame is a picture
    wait_for(lambda: not str(state(page, "hs_frame_time")).startswith("preparing"), 60, what="pictures to be ready")
    settle(page, 1500)
    page.evaluate(COUNT_PICTURES)
    start = time.perf_counter()
    page.wait_for_timeout(3000)
    shown = page.evaluate("() => window.hsPictures.map(p => p[0])")
    seconds = time.perf_counter() - start
    page.screenshot(path=str(shots / "play-pictures.png"))
    fps = len(shown) / seconds
    assert fps >= LEAST_FPS, f"{fps:.1f} pictures/s shown, 10 asked"
    page.click("#hs-play")  # pause
    page.wait_for_selector("#hs-picture", state="detached", timeout=10_000)
    frame = state(page, "hs_frame")
    assert state(page, "hs_playing") is False
    assert page.inner_text("#hs-frame-time").startswith("t = ") and f"frame {frame + 1} of {n}" in page.inner_text(
        "#hs-frame-time")
    at_once = view_pixels(page, shots / "play-paused-at-once.png")  # the live view took over: no older frame
    settle(page, 2000)
    later = view_pixels(page, shots / "play-paused.png")
    assert np.abs(at_once.astype(float) - later).mean() < 1.0


def test_turning_the_view_during_play_drops_the_pictures_for_live_frames(page):
    page.click("#hs-play")
    page.wait_for_selector("#hs-picture", timeout=30_000)  # the same look: the set made before is used
    box = page.locator(".hs-view").bounding_box()
    x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    page.mouse.move(x, y)
    page.mouse.down()
    for i in range(10):
        page.mouse.move(x + 8 * i, y + 3 * i)
        page.wait_for_timeout(30)
    page.mouse.up()
    # another camera: no picture of the old look is shown any more, and frames still advance
    page.wait_for_selector("#hs-picture", state="detached", timeout=10_000)
    before = state(page, "hs_frame")
    wait_for(lambda: state(page, "hs_frame") != before, 10, what="frames to advance after the turn")
    page.click("#hs-play")
