"""``heatsoak ui`` is safe by default: loopback only, and an access key on any other interface."""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent / "browser"))
from uidriver import free_port, launch_browser

MESHES = Path(__file__).resolve().parent.parent / "meshes"
MESH = MESHES / "lblock.vtu"


def start_ui(*extra, log):
    port = free_port()
    cmd = [sys.executable, "-u", "-m", "heatsoak.core.app.cli", "ui", str(MESH), "--server", "--port", str(port), *extra]
    return port, subprocess.Popen(cmd, stdout=log, stderr=subprocess.STDOUT)


def first_lines(path: Path, proc, timeout: float = 60.0) -> str:
    end = time.time() + timeout
    while time.time() < end:
        text = path.read_text()
        if "heatsoak UI on" in text and text.endswith("\n"):
            return text
        if proc.poll() is not None:
            return text
        time.sleep(0.2)
    raise TimeoutError(path.read_text())


def stop(proc) -> None:
    proc.terminate()
    try:
        proc.wait(10)
    except subprocess.TimeoutExpired:
        proc.kill()


def startup_text(tmp_path, *extra) -> tuple[int, str]:
    """Port and the first lines a UI server started with ``extra`` prints."""
    log_path = tmp_path / "ui.log"
    with open(log_path, "w") as log:
        port, proc = start_ui(*extra, log=log)
        try:
            return port, first_lines(log_path, proc)
        finally:
            stop(proc)


def test_other_interfaces_get_a_generated_key_printed_with_the_address(tmp_path):
    port, text = startup_text(tmp_path, "--host", "0.0.0.0")
    assert f":{port}/?secret=" in text
    assert "access key is required" in text and "generated" in text


def test_loopback_needs_no_key(tmp_path):
    port, text = startup_text(tmp_path, "--host", "127.0.0.1")
    assert f"http://127.0.0.1:{port}/ (this machine only)" in text and "secret" not in text


@pytest.mark.browser
def test_the_page_connects_only_with_the_key(tmp_path):
    playwright_api = pytest.importorskip("playwright.sync_api")
    key = "a-test-key-0123456789"
    (tmp_path / "key").write_text(key + "\n")
    log_path = tmp_path / "ui.log"
    with open(log_path, "w") as log:
        port, proc = start_ui("--host", "127.0.0.1", "--key-file", str(tmp_path / "key"), log=log)
        try:
            first_lines(log_path, proc)
            with playwright_api.sync_playwright() as p:
                browser = launch_browser(p)
                page = browser.new_page()
                start = time.time()
                page.goto(f"http://127.0.0.1:{port}/?secret={key}")
                page.wait_for_selector("#hs-facts", timeout=30_000)
                ready_s = time.time() - start
                other = browser.new_page()
                other.goto(f"http://127.0.0.1:{port}/?secret=wrong-key-0123456789")
                other.wait_for_timeout(max(3000, 3000 * ready_s))
                assert other.locator("#hs-facts").count() == 0
                browser.close()
        finally:
            stop(proc)
