"""Fixtures shared by the browser test modules: one ``heatsoak ui`` server and one page per module.

A module using them defines a module-scoped ``data_dir`` fixture (a folder holding the demo case).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent / "browser"))


@pytest.fixture(scope="module")
def server(request, data_dir, tmp_path_factory):
    """``heatsoak ui`` on the demo case in ``data_dir``; afterwards its log must hold no traceback or exception."""
    from uidriver import DEMO, serve

    log_dir = tmp_path_factory.mktemp(f"{request.module.__name__}-log")
    yield from serve(data_dir / DEMO.name, data_dir, log_dir, forbidden=("traceback", "exception"))


@pytest.fixture(scope="module")
def page(server):
    """One browser page on ``server``, its mesh facts shown."""
    from uidriver import browse

    yield from browse(server)


@pytest.fixture(scope="module")
def shots(tmp_path_factory) -> Path:
    """Folder of the module's screenshots: $HEATSOAK_UI_SHOTS or a new temporary one (printed)."""
    folder = Path(os.environ.get("HEATSOAK_UI_SHOTS") or tmp_path_factory.mktemp("ui-shots"))
    folder.mkdir(parents=True, exist_ok=True)
    print(f"\nUI screenshots in {folder}")
    return folder
