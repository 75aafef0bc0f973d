"""Make the README's picture of the demo from a real browser run: ``python tests/browser/readme_shot.py OUT.png``.

Runs ``heatsoak ui`` on the demo case, presses Run, moves to a late frame and hovers the probe
curves, then saves a 1600x1000 screenshot of the page.
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

from uidriver import DEMO, MESHES, UiServer, launch_browser, run_and_wait  # noqa: E402


def main(out: Path) -> None:
    from playwright.sync_api import sync_playwright

    srv = UiServer(DEMO, MESHES, Path(out).resolve().parent)
    try:
        srv.wait_ready()
        with sync_playwright() as p:
            browser = launch_browser(p, 1600, 1000)
            page = browser.new_page()
            page.goto(srv.url)
            page.wait_for_selector("#hs-facts", timeout=30_000)
            run_and_wait(page, 0)
            page.evaluate("() => window.trame.state.set('hs_frame', 30)")
            page.wait_for_selector("#hs-frame-time >> text=frame 31 of", timeout=15_000)
            page.wait_for_timeout(1500)
            plot = page.locator("#hs-probe-plot .js-plotly-plot").bounding_box()
            page.mouse.move(plot["x"] + plot["width"] * 0.45, plot["y"] + plot["height"] * 0.5, steps=5)
            page.wait_for_timeout(800)
            page.screenshot(path=str(out))
            browser.close()
    finally:
        srv.stop()
        Path(srv.log_path).unlink(missing_ok=True)


if __name__ == "__main__":
    main(Path(sys.argv[1] if len(sys.argv) > 1 else MESHES / "platen_warmup.png"))
