"""Two browser tabs on one ``heatsoak ui``: the first owns the workspace, the second is told and only
watches (its edits, runs and cancels never reach the server, even when forced past the locked page),
until it explicitly takes over; the tab it replaces is told and watches from then on. And in the owning
tab: cases listed in the data folder that name files outside it are refused without showing them, and
the case-and-mesh zip holds only the data folder's files.

One server and one browser with two pages serve the tests of this file, in order.
"""

from __future__ import annotations

import shutil
import zipfile
from pathlib import Path

import pytest
from uidriver import DEMO, copy_demo_files, fill, launch_browser, open_listed, open_section, require_browser, wait_for

pytestmark = pytest.mark.browser
playwright_api = require_browser()


@pytest.fixture(scope="module")
def data_dir(tmp_path_factory) -> Path:
    """The demo case, and two cases naming files outside the folder: a mesh by '..', a table by absolute path."""
    up = tmp_path_factory.mktemp("ui-tabs")
    (up / "data").mkdir()
    folder = copy_demo_files(up / "data", (DEMO.name, "platen.msh", "platen_base.csv"))
    shutil.copy(folder / "platen.msh", up / "outside.msh")
    text = (folder / DEMO.name).read_text()
    (folder / "escape.toml").write_text(text.replace('file = "platen.msh"', 'file = "../outside.msh"'))
    (folder / "passwd.toml").write_text(text.replace('table = "platen_base.csv"', 'table = "/etc/passwd"'))
    return folder


@pytest.fixture(scope="module")
def tabs(server):
    """Two pages of one browser on ``server``: the first loaded first (it owns the workspace)."""
    with playwright_api.sync_playwright() as p:
        browser = launch_browser(p)
        pages = []
        for _ in range(2):
            page = browser.new_page()
            page.goto(server.url)
            page.wait_for_selector("#hs-facts", timeout=30_000)
            wait_for(lambda pg=page: state(pg, "hs_me"), 15, what="the tab to be named")
            pages.append(page)
        yield pages
        browser.close()


def state(page, key):
    return page.evaluate(f"() => trame.state.get('{key}')")


def force(page, code: str) -> None:
    """Run ``code`` in ``page`` past its locks (a hostile or scripted page), then let it be sent."""
    page.evaluate("() => document.querySelectorAll('[inert]').forEach(e => e.removeAttribute('inert'))")
    page.evaluate(code)
    page.wait_for_timeout(800)


def test_the_second_tab_is_told_the_workspace_is_in_use_and_the_first_is_not(tabs):
    first, second = tabs
    assert state(first, "hs_owner") == state(first, "hs_me") == "tab 1"
    text = second.inner_text("#hs-session-text")
    assert "being edited in tab 1" in text and "This tab (tab 2) only watches" in text
    assert first.locator("#hs-session").count() == 0
    assert second.locator("#hs-setup-drawer [inert]").count() >= 1 and first.locator("[inert]").count() == 0
    assert second.locator("#hs-watch-cover").count() == 1


def test_a_listed_case_naming_a_mesh_outside_the_data_folder_is_refused(tabs):
    first = tabs[0]
    open_listed(first, "escape.toml")
    error = first.locator("#hs-mesh-error")
    error.wait_for(timeout=15_000)
    assert "mesh.file = '../outside.msh': leads outside the data folder" in error.inner_text()
    assert "platen.msh" in first.inner_text("#hs-facts")


def test_a_listed_case_naming_an_absolute_table_opens_without_reading_or_showing_it(tabs):
    first = tabs[0]
    open_listed(first, "passwd.toml")
    wait_for(lambda: "table = '/etc/passwd': absolute file names are not allowed"
             in first.inner_text("#hs-mesh-error"), 15, what="the refused table to be named")
    assert "root:" not in first.content()


def test_the_case_and_mesh_zip_holds_only_the_data_folders_files(tabs, data_dir):
    first = tabs[0]
    with first.expect_download() as dl:
        first.click("#hs-export-bundle")
    with zipfile.ZipFile(dl.value.path()) as z:
        assert sorted(z.namelist()) == ["case.toml", "platen.msh"]
        assert z.read("platen.msh") == (data_dir / "platen.msh").read_bytes()


def test_edits_and_runs_forced_from_the_watching_tab_never_reach_the_workspace(tabs):
    first, second = tabs
    end = state(first, "hs_t_end")
    force(second, "() => { trame.state.set('hs_t_end', 12345); trame.state.set('hs_run_request', 99); }")
    wait_for(lambda: state(second, "hs_t_end") == end, 10, what="the watcher's field to be given back")
    assert state(first, "hs_t_end") == end and not state(first, "hs_running")
    force(second, "() => document.querySelector('#hs-run').click()")
    assert not state(first, "hs_running") and not state(second, "hs_running")


def test_cancel_from_the_watching_tab_does_not_stop_the_owners_run(tabs):
    first, second = tabs
    open_section(first, "Start and time")
    fill(first, "#hs-end", 200000)
    fill(first, "#hs-step", 2)
    first.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    first.click("#hs-run")
    wait_for(lambda: "step " in first.inner_text("#hs-progress-text"), 60, what="the owner's run to be stepping")
    second.wait_for_selector("#hs-cancel")
    force(second, "() => document.querySelector('#hs-cancel').click()")
    def step():
        text = first.inner_text("#hs-progress-text")
        assert "step " in text, text  # still running, not stopping
        return int(text.split("step ")[1].split(" ")[0])

    before = step()
    wait_for(lambda: step() > before + 2, 20, what="the run to go on after the watcher's cancel")
    assert "stopping" not in first.inner_text("#hs-progress-text")
    first.click("#hs-cancel")
    wait_for(lambda: "cancelled" in first.inner_text("#hs-progress-text"), 30, what="the owner's cancel to stop it")


def test_taking_over_makes_the_watcher_the_owner_and_tells_the_first_tab(tabs):
    first, second = tabs
    second.click("#hs-take-over")
    first.wait_for_selector("#hs-session", timeout=10_000)
    assert "tab 2 took over this workspace: this tab (tab 1) only watches now" in first.inner_text("#hs-session-text")
    second.wait_for_selector("#hs-session", state="detached", timeout=10_000)
    open_section(second, "Start and time")
    fill(second, "#hs-end", 777)
    wait_for(lambda: state(first, "hs_t_end") in (777, "777"), 10, what="the new owner's edit to reach the other tab")
    force(first, "() => trame.state.set('hs_t_end', 1)")
    assert state(second, "hs_t_end") in (777, "777")


def test_when_the_owner_closes_the_watcher_is_told_and_may_take_over(tabs):
    first, second = tabs
    second.close()
    wait_for(lambda: "has closed" in first.inner_text("#hs-session-text"), 15, what="the watcher to be told")
    first.click("#hs-take-over")
    first.wait_for_selector("#hs-session", state="detached", timeout=10_000)
    assert state(first, "hs_owner") == "tab 1"

