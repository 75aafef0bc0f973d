"""What the export panel says and hands over: a zip streamed once over HTTP, then removed; a failed or
cancelled zip as one line; a probes.csv too big to send refused with its size named."""

from __future__ import annotations

import asyncio
from pathlib import Path
from types import SimpleNamespace

import pytest
from heatsoak.plugin.export import handout
from heatsoak.plugin.export.actions import MAX_PROBE_CSV_BYTES, probe_csv, zip_done


def fake_panel():
    """The parts of a panel the export handlers touch: state, the download hook, the server-bind hook."""
    binds, ready = [], []
    ctrl = SimpleNamespace(on_server_bind=SimpleNamespace(add=binds.append), hs_download_ready=ready.append)
    panel = SimpleNamespace(state=SimpleNamespace(hs_export_error=""), ctrl=ctrl, download=None)
    handout.register(panel)
    return panel, binds, ready


async def fetch_twice(panel, binds, url: str):
    """GET ``url`` twice from the route the panel adds to a web app; both (status, body)."""
    from aiohttp import web
    from aiohttp.test_utils import TestClient, TestServer

    app = web.Application()
    binds[0](SimpleNamespace(app=app))
    async with TestClient(TestServer(app)) as client:
        answers = []
        for _ in range(2):
            response = await client.get("/" + url)
            answers.append((response.status, await response.read(), response.headers.get("Content-Disposition")))
        return answers


def test_a_zip_is_streamed_once_by_its_address_then_removed(tmp_path):
    panel, binds, _ = fake_panel()
    path = tmp_path / "results-run-001.zip"
    content = bytes(range(256)) * 9000  # over two chunks of the route
    path.write_bytes(content)
    url = handout.offer(panel, path, path.name)
    first, second = asyncio.run(fetch_twice(panel, binds, url))
    assert first == (200, content, 'attachment; filename="results-run-001.zip"')
    assert second[0] == 404 and b"taken already" in second[1]
    assert not path.exists()


def test_an_offer_not_taken_is_removed_by_the_next(tmp_path):
    panel, _, _ = fake_panel()
    old, new = tmp_path / "a.zip", tmp_path / "b.zip"
    old.write_bytes(b"old"), new.write_bytes(b"new")
    first = handout.offer(panel, old, old.name)
    second = handout.offer(panel, new, new.name)
    assert first != second and not old.exists() and new.exists() and len(panel.handouts) == 1


def job(status="complete", error="", result=None):
    return SimpleNamespace(status=status, error=error, result=result)


@pytest.mark.parametrize(("ended", "line"), [
    (job("failed", "results folder /w/runs/run-002 is gone (discarded or moved?): nothing to zip"),
     "results zip failed: results folder /w/runs/run-002 is gone (discarded or moved?): nothing to zip"),
    (job("failed", "results zip of run-002 not made: No space left on device (/w/exports/r.zip.part)"),
     "results zip failed: results zip of run-002 not made: No space left on device (/w/exports/r.zip.part)"),
    (job("cancelled", "", {"path": None}), "results zip cancelled: no file kept"),
])
def test_a_zip_that_failed_or_was_cancelled_is_one_line_and_no_download(ended, line):
    panel, _, ready = fake_panel()
    zip_done(panel, ended)
    assert panel.state.hs_export_error == line and "\n" not in line
    assert ready == [] and panel.handouts == {}


def test_a_finished_zip_is_offered_to_the_browser_by_name(tmp_path):
    panel, _, ready = fake_panel()
    path = tmp_path / "results-run-004.zip"
    path.write_bytes(b"PK")
    zip_done(panel, job(result={"path": str(path)}))
    assert ready == [{"name": "results-run-004.zip", "mime": "application/zip", "url": ready[0]["url"]}]
    assert ready[0]["url"].startswith(handout.ROUTE + "/") and panel.state.hs_export_error == ""


def test_probes_csv_is_read_here_when_small_and_refused_when_too_big(tmp_path):
    panel, _, _ = fake_panel()
    small = tmp_path / "probes.csv"
    small.write_text("time_s,T1\n0,20\n", encoding="utf-8")
    assert probe_csv(panel, small) == "time_s,T1\n0,20\n"
    with small.open("r+b") as f:  # a sparse file: as big as asked, no disk used
        f.truncate(MAX_PROBE_CSV_BYTES + 1)
    assert probe_csv(panel, small) is None
    assert panel.state.hs_export_error.startswith("probes.csv of this run is 64 MB, above the 64 MB")
    assert "Result files (.zip)" in panel.state.hs_export_error


def test_a_missing_probes_csv_names_the_file(tmp_path):
    panel, _, _ = fake_panel()
    assert probe_csv(panel, tmp_path / "run-009" / "probes.csv") is None
    assert panel.state.hs_export_error.startswith("probes.csv cannot be read: No such file or directory")
    assert str(Path("run-009") / "probes.csv") in panel.state.hs_export_error
