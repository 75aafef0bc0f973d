"""Start ``heatsoak ui`` and drive it in headless chromium (helpers for the tests/test_ui_*.py browser tests)."""

from __future__ import annotations

import io
import os
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

import numpy as np

CHROMIUM = "/usr/bin/chromium"
#: The demo files, and the case ``heatsoak ui`` opens with no argument.
MESHES = Path(__file__).resolve().parent.parent.parent / "meshes"
DEMO = MESHES / "platen_warmup.toml"
CHROMIUM_ARGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
]


def require_browser():
    """Skip the calling test module (at import) without playwright or Debian's chromium; returns
    ``playwright.sync_api``."""
    import pytest

    api = pytest.importorskip("playwright.sync_api")
    if not Path(CHROMIUM).exists():
        pytest.skip(f"needs Debian's chromium at {CHROMIUM}", allow_module_level=True)
    return api


def copy_demo_files(folder: Path, names) -> Path:
    """Copy the demo files ``names`` into ``folder``; returns it."""
    import shutil

    for name in names:
        shutil.copy(MESHES / name, Path(folder) / name)
    return Path(folder)


def field_message(page, selector: str, text: str) -> str:
    """Wait for the message containing ``text`` under the text field whose input is ``selector``; its text."""
    field = page.locator(selector).locator("xpath=ancestor::div[contains(@class,'v-input')]").first
    message = field.locator(".v-messages__message", has_text=text)
    message.wait_for(timeout=15_000)
    return message.inner_text()


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class UiServer:
    """``heatsoak ui CASE --server`` on a free loopback port, as a subprocess (``extra``: more arguments)."""

    def __init__(self, case: Path, data_dir: Path, log_dir: Path, extra=()):
        self.port = free_port()
        self.log_path = log_dir / "ui-server.log"
        self._log = open(self.log_path, "w")  # noqa: SIM115 - open for the life of the server
        env = {**os.environ, "PYTHONUNBUFFERED": "1"}
        cmd = [sys.executable, "-m", "heatsoak.core.app.cli", "ui", str(case), "--data-dir", str(data_dir),
               "--server", "--port", str(self.port), "--host", "127.0.0.1", *extra]
        self.proc = subprocess.Popen(cmd, stdout=self._log, stderr=subprocess.STDOUT, env=env)
        self.url = f"http://127.0.0.1:{self.port}/"

    def wait_ready(self, timeout: float = 60.0) -> None:
        end = time.time() + timeout
        while time.time() < end:
            if self.proc.poll() is not None:
                raise RuntimeError(f"heatsoak ui exited early:\n{self.log()}")
            try:
                with urllib.request.urlopen(self.url, timeout=2) as r:
                    if r.status == 200:
                        return
            except OSError:
                time.sleep(0.3)
        raise TimeoutError(f"heatsoak ui not ready after {timeout} s:\n{self.log()}")

    def log(self) -> str:
        if not self._log.closed:
            self._log.flush()
        return self.log_path.read_text(errors="replace")

    def stop(self) -> None:
        self.proc.terminate()
        try:
            self.proc.wait(10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
        self._log.close()


def launch_browser(playwright, width: int = 1600, height: int = 1000):
    """A persistent headless chromium context with a fresh profile folder."""
    return playwright.chromium.launch_persistent_context(
        tempfile.mkdtemp(prefix="hs-chromium-"), executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True,
        viewport={"width": width, "height": height}, accept_downloads=True,
    )


def serve(case: Path, data_dir: Path, log_dir: Path, forbidden=("traceback",), extra=()):
    """Generator for a module fixture: a ready UI server on ``case`` (``extra``: more arguments of
    ``heatsoak ui``); after the module, it is stopped and its log must hold none of the ``forbidden``
    words (any case)."""
    srv = UiServer(case, data_dir, log_dir, extra)
    try:
        srv.wait_ready()
        yield srv
    finally:
        srv.stop()
    for word in forbidden:
        assert word.lower() not in srv.log().lower(), srv.log()


def browse(server):
    """Generator for a module fixture: one browser page on ``server``, its mesh facts shown."""
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        browser = launch_browser(p)
        page = browser.new_page()
        page.goto(server.url)
        page.wait_for_selector("#hs-facts", timeout=30_000)
        page.wait_for_function("() => trame.state.get('hs_me')", timeout=15_000)  # the tab owns the workspace
        yield page
        browser.close()


#: Most seconds between a press and the server's answer reaching the page while jobs work (the
#: issue's bound). The browser's own redraw comes on top: 0.2-0.7 s on the shared test machine.
#: HEATSOAK_UI_ANSWER_S sets another bound on a machine loaded far beyond its cores.
RESPONSE_S = float(os.environ.get("HEATSOAK_UI_ANSWER_S", "1.0"))


def state(page, key: str):
    """The value of ``key`` in the page's copy of the server state."""
    return page.evaluate(f"trame.state.get('{key}')")


def timed(action, done, what: str) -> float:
    """Seconds from ``action()`` until ``done()`` holds."""
    start = time.monotonic()
    action()
    wait_for(done, 15, interval=0.02, what=what)
    return time.monotonic() - start


def timed_change(page, key: str, action) -> float:
    """Seconds from ``action()`` until the page's ``key`` changes."""
    before = state(page, key)
    return timed(action, lambda: state(page, key) != before, f"{key} to change")


def median_of(n: int, measure) -> float:
    """Median of ``measure(i)`` for i = 0 .. n-1 (one slow moment of a shared machine is not the UI)."""
    return sorted(measure(i) for i in range(n))[n // 2]


def wait_for(predicate, timeout: float = 30.0, interval: float = 0.2, what: str = "condition"):
    end = time.time() + timeout
    while time.time() < end:
        value = predicate()
        if value:
            return value
        time.sleep(interval)
    raise TimeoutError(f"timed out waiting for {what}")


def view_pixels(page, path: Path) -> np.ndarray:
    """Screenshot of the 3D view as an (h, w, 3) array, also saved to ``path``."""
    import imageio.v3 as iio

    png = page.locator(".hs-view").screenshot(path=str(path))
    return iio.imread(io.BytesIO(png))[..., :3].astype(float)


def fill(page, selector: str, value) -> None:
    """Type into a vuetify text field (the id sits on the input) and let the state sync."""
    field = page.locator(selector)
    field.fill(str(value))
    field.dispatch_event("change")
    settle(page, 250)  # the client sends state changes in batches; let them reach the server
    edits_sent(page)


def edits_sent(page, timeout_ms: int = 15_000) -> None:
    """Wait until the browser holds no state edit it has not sent to the server."""
    page.wait_for_function("() => !((window.trame && window.trame.state && window.trame.state.dirtyKeys) || {}).size",
                           timeout=timeout_ms)


def choose(page, field_selector: str, option: str) -> None:
    """Pick ``option`` in a vuetify select whose input has ``field_selector``."""
    page.locator(field_selector).locator("xpath=ancestor::div[contains(@class,'v-field')]").first.click()
    page.get_by_role("option", name=option).first.click()
    settle(page)


def settle(page, ms: int = 500) -> None:
    """Give the server a moment to answer a change (it may push values back)."""
    page.wait_for_timeout(ms)


def select_group(page, name: str) -> None:
    """Select a surface group in the legend and wait until the editor shows it."""
    page.locator(".hs-group", has_text=name).first.click()
    page.wait_for_selector(f"#hs-editor >> text=Condition on {name}")
    settle(page)


def set_condition(page, group: str, kind: str, shape: str, values: dict | None = None) -> None:
    """In the set-up view (switched to if results show), give ``group`` a condition of ``kind``
    (its label) with schedule ``shape`` ("constant", "ramp", "table"), then fill the schedule fields named in ``values``
    (ramp: start, end, at, over; they are filled as ``#hs-ramp-<name>``)."""
    setup_view = page.locator("#hs-view-mode button:has-text('set-up')")
    if setup_view.count():  # the view switch shows once there are results
        setup_view.click()
    select_group(page, group)
    choose(page, "#hs-kind", kind)
    page.locator("#hs-shape button", has_text=shape).click()
    settle(page)
    for key, value in (values or {}).items():
        fill(page, f"#hs-{shape}-{key}", value)


def open_section(page, title: str) -> None:
    """Expand a set-up section (expansion panel) by its title, if it is closed."""
    panel = page.locator(".hs-section", has_text=title).first
    if "v-expansion-panel--active" not in (panel.get_attribute("class") or ""):
        panel.locator(".v-expansion-panel-title").click()
        page.wait_for_timeout(300)


def discard_if_asked(page, ms: int = 1500) -> None:
    """Answer the question asked before a set-up with changes is replaced (if it comes) by opening anyway."""
    from playwright.sync_api import TimeoutError as PlaywrightTimeout

    try:
        page.wait_for_selector("#hs-guard-open", state="visible", timeout=ms)
    except PlaywrightTimeout:
        return
    page.click("#hs-guard-open")
    page.wait_for_selector("#hs-guard", state="hidden", timeout=15_000)


def open_listed(page, name: str) -> None:
    """Click a file of the data-folder list, letting any changes of the set-up go."""
    page.locator(".hs-file", has_text=name).first.click()
    discard_if_asked(page)


def run_and_wait(page, runs_before: int) -> None:
    """Press Run once it is enabled and wait until the run is listed and complete."""
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    page.click("#hs-run")
    wait_for(lambda: page.locator(".hs-run-row").count() > runs_before, 90, what="the run to be listed")
    page.wait_for_selector("#hs-progress-text >> text=complete", timeout=30_000)


def drag_slider(page, selector: str, fraction: float, steps: int = 30, seconds: float = 1.5) -> float:
    """Drag the thumb of the slider ``selector`` to ``fraction`` of its track, slowly like a hand
    (``steps`` moves over ``seconds``); returns the seconds the drag took."""
    page.locator(selector).scroll_into_view_if_needed()
    thumb = page.locator(f"{selector} .v-slider-thumb").bounding_box()
    track = page.locator(f"{selector} .v-slider-track").bounding_box()
    y = thumb["y"] + thumb["height"] / 2
    page.mouse.move(thumb["x"] + thumb["width"] / 2, y)
    start = time.perf_counter()
    page.mouse.down()
    x0, x1 = thumb["x"] + thumb["width"] / 2, track["x"] + fraction * track["width"]
    for i in range(1, steps + 1):
        page.mouse.move(x0 + (x1 - x0) * i / steps, y)
        page.wait_for_timeout(1000 * seconds / steps)
    page.mouse.up()
    return time.perf_counter() - start


def demo_data(name: str, files=(DEMO.name, "platen.msh", "platen_base.csv")):
    """A module-scoped ``data_dir`` fixture: a fresh folder ``name`` holding the demo ``files``."""
    import pytest

    @pytest.fixture(scope="module")
    def data_dir(tmp_path_factory) -> Path:
        return copy_demo_files(tmp_path_factory.mktemp(name), files)

    return data_dir
