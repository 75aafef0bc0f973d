"""The browser UI misused as an analyst might: unreadable entries are named where they were typed, never a traceback.

One ``heatsoak ui`` server serves every test in this file, in order.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from uidriver import choose, copy_demo_files, field_message, fill, open_section, require_browser, settle, wait_for

pytestmark = pytest.mark.browser
playwright_api = require_browser()


#: A case whose values have the wrong types: a word for a density and for output.every, a probe with two coordinates.
BAD_TYPES = """[mesh]
file = "platen.msh"
unit = "mm"
[material.platen]
density = "heavy"
specific_heat = 875
conductivity = 177
[output]
every = "often"
[[probe]]
name = "A"
at = [1, 2]
"""
#: A case naming a length unit that does not exist.
BAD_UNIT = '[mesh]\nfile = "platen.msh"\nunit = "furlong"\n'


@pytest.fixture(scope="module")
def data_dir(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("ui-misuse-data")
    copy_demo_files(folder, ("platen_warmup.toml", "platen.msh", "platen_base.csv", "lblock.vtu"))
    (folder / "badtypes.toml").write_text(BAD_TYPES)
    (folder / "badunit.toml").write_text(BAD_UNIT)
    return folder


def no_traceback(page, server) -> None:
    assert "Traceback" not in page.content()
    assert "Traceback" not in server.log() and "exception" not in server.log().lower(), server.log()


def test_a_word_in_keep_every_is_named_at_the_field(page, server):
    open_section(page, "Start and time")
    fill(page, "#hs-every", "abc")
    field_message(page, "#hs-every", "'abc' is not a number")
    assert "output.every" in page.inner_text("#hs-run-reason")
    fill(page, "#hs-every", "2.5")
    field_message(page, "#hs-every", "not a whole number")
    fill(page, "#hs-every", "-3")
    field_message(page, "#hs-every", ">= 1")
    assert page.locator("#hs-run").is_disabled()
    fill(page, "#hs-every", "1")
    page.wait_for_selector("#hs-run:not([disabled])", timeout=15_000)
    no_traceback(page, server)


def test_the_run_reason_names_the_field_of_an_unreadable_number(page, server):
    fill(page, "#hs-end", "abc")
    wait_for(lambda: "time.end" in page.inner_text("#hs-run-reason"), 15, what="the reason to name time.end")
    fill(page, "#hs-end", "600")
    no_traceback(page, server)


def test_a_probe_that_cannot_be_read_is_refused_and_the_typed_values_kept(page, server):
    open_section(page, "Probes")
    rows = page.locator("#hs-probe-list tbody tr").count()
    for key, value in (("name", "Q"), ("x", "abc"), ("y", 0), ("z", 0)):
        fill(page, f"#hs-p-{key}", value)
    page.click("#hs-add-probe")
    page.wait_for_selector("#hs-probe-error >> text=probe.Q.x", timeout=15_000)
    assert "'abc' is not a number" in page.inner_text("#hs-probe-error")
    assert page.locator("#hs-p-x").input_value() == "abc"
    assert page.locator("#hs-probe-list tbody tr").count() == rows
    fill(page, "#hs-p-x", 0)
    fill(page, "#hs-p-name", "")
    page.click("#hs-add-probe")
    page.wait_for_selector("#hs-probe-error >> text=needs a name", timeout=15_000)
    no_traceback(page, server)


def test_exporting_a_case_with_unreadable_entries_saves_nothing_and_says_why(page, server):
    downloads = []

    def saw(download):
        downloads.append(download)

    page.on("download", saw)
    fill(page, "#hs-initial", "warm")
    page.click("#hs-export-case")
    page.wait_for_selector("text=the case has unreadable entries: initial.temperature", timeout=15_000)
    settle(page, 1000)
    assert downloads == []  # not a file holding "null"
    fill(page, "#hs-initial", 22)
    with page.expect_download() as dl:
        page.click("#hs-export-case")
    assert "[mesh]" in Path(dl.value.path()).read_text()
    # the state change that clears the message may reach the page just after the file
    page.wait_for_selector("text=the case has unreadable entries", state="detached", timeout=15_000)
    page.remove_listener("download", saw)
    no_traceback(page, server)


def test_a_case_file_with_wrong_types_opens_with_the_entries_marked(page, server):
    open_section(page, "Mesh")
    page.locator(".hs-file", has_text="badtypes.toml").click()
    page.wait_for_selector("#hs-mesh-error >> text=probe[0]", timeout=30_000)
    open_section(page, "Materials")
    field_message(page, "#hs-density", "'heavy' is not a number")
    field_message(page, "#hs-every", "'often' is not a number")
    no_traceback(page, server)


def test_a_case_file_with_an_unknown_unit_leaves_the_open_mesh_usable(page, server):
    open_section(page, "Mesh")
    choose(page, "#hs-unit", "mm")
    page.locator(".hs-file", has_text="badunit.toml").click()
    page.wait_for_selector("#hs-mesh-error >> text=badunit.toml", timeout=30_000)
    assert "furlong" in page.inner_text("#hs-mesh-error")
    assert page.locator("#hs-unit").input_value() == "mm"  # the unit the open mesh was read in
    page.locator(".hs-file", has_text="lblock.vtu").click()
    page.wait_for_selector("#hs-facts >> text=lblock.vtu", timeout=30_000)
    page.wait_for_selector("#hs-mesh-error", state="detached", timeout=15_000)
    no_traceback(page, server)
