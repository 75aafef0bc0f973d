"""The results zip made by a worker: every file byte for byte, progress in bytes, a cancel leaves no
file, a missing folder or an unwritable zip gives one line naming it."""

from __future__ import annotations

import os
import time
import zipfile
from pathlib import Path

import pytest
from heatsoak.core.errors import ResultsError
from heatsoak.plugin.export import packing
from heatsoak.plugin.export.packing import pack_folder
from heatsoak.plugin.jobs.actions import status_text
from heatsoak.plugin.jobs.pool import JobRunner


class Recorder:
    """A stand-in for the worker's reporter: records phases and progress, cancels after ``stop_after`` reports."""

    def __init__(self, stop_after: int | None = None):
        self.phases, self.progress, self.stop_after = [], [], stop_after

    def phase(self, name, total=0):
        self.phases.append((name, total))

    def advance(self, done, total=0, detail="", eta_s=None, force=False):
        self.progress.append((done, total, detail))

    def stopped(self) -> bool:
        return self.stop_after is not None and len(self.progress) >= self.stop_after


@pytest.fixture
def results(tmp_path) -> Path:
    """A results folder: text files, an incompressible 'field' file several chunks long, a subfolder."""
    folder = tmp_path / "run-001"
    (folder / "extra").mkdir(parents=True)
    (folder / "probes.csv").write_text("time_s,T1\n0,20\n10,21.5\n", encoding="utf-8")
    (folder / "summary.json").write_text('{"status": "complete"}', encoding="utf-8")
    (folder / "temperature.h5").write_bytes(os.urandom(3 * packing.CHUNK_BYTES + 123))
    (folder / "extra" / "note.txt").write_bytes(b"")
    return folder


def test_the_zip_holds_every_file_byte_for_byte(results, tmp_path):
    target = tmp_path / "out" / "results.zip"
    report = Recorder()
    result = pack_folder(report, results, target)
    files = {p.relative_to(results).as_posix(): p.read_bytes() for p in results.rglob("*") if p.is_file()}
    with zipfile.ZipFile(target) as z:
        assert z.testzip() is None
        assert {name: z.read(name) for name in z.namelist()} == files
    assert result == {"path": str(target), "files": 4, "bytes": sum(map(len, files.values())),
                      "zip_bytes": target.stat().st_size}
    assert not list(target.parent.glob("*.part"))


def test_progress_is_counted_in_bytes_up_to_the_folder_size(results, tmp_path):
    report = Recorder()
    pack_folder(report, results, tmp_path / "r.zip")
    total = sum(p.stat().st_size for p in results.rglob("*") if p.is_file())
    assert report.phases == [("packing", total)]
    done = [d for d, _, _ in report.progress]
    assert done == sorted(done) and done[-1] == total and len(set(done)) >= 4  # the big file in several chunks
    assert report.progress[-1][2] == f"{total / 1e6:.0f} of {total / 1e6:.0f} MB, file 4 of 4"


def test_a_cancelled_zip_leaves_no_file(results, tmp_path):
    target = tmp_path / "results.zip"
    result = pack_folder(Recorder(stop_after=2), results, target)
    assert result["path"] is None and result["zip_bytes"] == 0
    assert list(tmp_path.glob("results.zip*")) == []


def test_a_missing_folder_gives_a_message_naming_it(tmp_path):
    gone = tmp_path / "run-007"
    with pytest.raises(ResultsError, match="results folder .*run-007 is gone"):
        pack_folder(Recorder(), gone, tmp_path / "results.zip")
    assert list(tmp_path.iterdir()) == []


def test_a_zip_that_cannot_be_written_names_it_and_leaves_no_half_file(results, tmp_path):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("a file where the zip's folder should be")
    with pytest.raises(ResultsError, match="results zip of run-001 not made: .*not-a-folder"):
        pack_folder(Recorder(), results, blocker / "results.zip")
    assert blocker.read_text() == "a file where the zip's folder should be"


def test_in_a_worker_the_line_shows_packing_and_cancel_removes_the_half_zip(results, tmp_path, monkeypatch):
    """Through the job runner: the phase and MB in the progress line, then a cancel mid-way."""
    big = results / "temperature.h5"
    big.write_bytes(os.urandom(1 << 20) * 60)  # 60 MB that deflate cannot shrink much: a few seconds
    runner = JobRunner(spare=False)
    try:
        job = runner.submit("export", pack_folder, results, tmp_path / "results.zip")
        end = time.monotonic() + 15
        while not (job.phase == "packing" and job.done > packing.ETA_AFTER_BYTES):
            assert not job.poll() and time.monotonic() < end, (job.status, job.error)
            time.sleep(0.02)
        text = status_text(job)
        assert text.startswith("packing") and " MB, file " in text and "left" in text
        job.cancel()
        assert "nothing is kept" in status_text(job)
        while not job.poll():
            assert time.monotonic() < end + 15
            time.sleep(0.02)
    finally:
        runner.close()
    assert job.status == "cancelled" and job.result["path"] is None
    assert list(tmp_path.glob("results.zip*")) == []
