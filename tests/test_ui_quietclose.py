"""A browser tab closed mid-message leaves no traceback in the server's log; real errors still do."""

from __future__ import annotations

import logging
import sys
import traceback

import pytest
from heatsoak.plugin.app import ClosedConnectionFilter, quiet_closed_connections


class Keep(logging.Handler):
    def __init__(self):
        super().__init__()
        self.lines = []

    def emit(self, record):
        self.lines.append(record.getMessage())
        if record.exc_info:
            self.lines.append("Traceback: " + repr(record.exc_info[1]))


@pytest.fixture
def logged():
    quiet_closed_connections()
    quiet_closed_connections()  # installing twice adds no second filter
    keep = Keep()
    names = ("wslink.protocol", "aiohttp.server", "asyncio")
    for name in names:
        assert sum(isinstance(f, ClosedConnectionFilter) for f in logging.getLogger(name).filters) == 1
        logging.getLogger(name).addHandler(keep)
    yield keep
    for name in names:
        logging.getLogger(name).removeHandler(keep)


def _raise(exc):
    try:
        raise exc
    except Exception as e:
        return e, traceback.format_exc(), sys.exc_info()


def _call_error(exc):
    """What the web-socket layer logs when a call fails: three records."""
    log = logging.getLogger("wslink.protocol")
    e, trace, _ = _raise(exc)
    log.error("Exception raised")
    log.error(repr(e))
    log.error(trace)


def test_a_closed_connection_logs_nothing(logged):
    _call_error(ConnectionResetError("Cannot write to closing transport"))
    _, _, info = _raise(ConnectionResetError("Cannot write to closing transport"))
    logging.getLogger("aiohttp.server").error("Error handling request", exc_info=info)
    logging.getLogger("asyncio").error("Task exception was never retrieved", exc_info=info)
    assert logged.lines == []


def test_a_real_error_is_still_logged_whole(logged):
    _call_error(ValueError("bad value"))
    _, _, info = _raise(KeyError("k"))
    logging.getLogger("aiohttp.server").error("Error handling request", exc_info=info)
    assert logged.lines[0] == "Exception raised: ValueError('bad value')"
    assert logged.lines[1].startswith("Traceback") and "bad value" in logged.lines[1]
    assert logged.lines[2:] == ["Error handling request", "Traceback: KeyError('k')"]


def test_a_real_error_after_a_closed_connection_keeps_its_traceback(logged):
    _call_error(ConnectionResetError("closing"))
    _call_error(RuntimeError("after"))
    assert logged.lines[0] == "Exception raised: RuntimeError('after')"
    assert "after" in logged.lines[1] and logged.lines[1].startswith("Traceback")
    assert len(logged.lines) == 2
