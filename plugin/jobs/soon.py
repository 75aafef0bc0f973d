"""Work that may wait until the answer to the current event has gone out.

A click on a group must show the group at once; the schedule preview (a
plot) can follow a moment later. :func:`soon` queues such work on the event
loop; the same work queued again before it ran runs once.
"""

from __future__ import annotations

import asyncio

#: Seconds the work waits, so the answer to the event is written to the browser first.
AFTER_S = 0.05


def soon(panel, fn) -> None:
    """Call ``fn(panel)`` inside a state update after the current handler returns.

    Without a running event loop (scripts, tests) it is called now.
    """
    try:
        loop = asyncio.get_running_loop()
    except RuntimeError:
        fn(panel)
        return
    pending = panel.__dict__.setdefault("_soon", set())
    if fn in pending:
        return
    pending.add(fn)

    def run():
        pending.discard(fn)
        with panel.state:
            fn(panel)

    loop.call_later(AFTER_S, run)
