"""The one place that reaches under trame into its web-socket layer (wslink 2.x): which browser
connection sent the message being handled, connections opening and closing, and a gate in front of
the calls that change the workspace.

trame keeps one state for every connection and does not say who sent a change. wslink does: it
records the sending connection just before it calls a method, in its handler's
``web_app.last_active_client_id``. A :class:`wslink.websocket.LinkProtocol` registered through
trame's ``add_protocol_to_configure`` hears connections open and close and reaches that handler
(its ``publish`` is the handler's bound method); the gate then wraps the handler's method table.
If a later wslink changes this, :meth:`Gate.sender` returns None and the gate lets nothing through
that changes the workspace (tests in tests/test_ui_tabs.py fail loudly).
"""

from __future__ import annotations

import inspect
import logging

from trame_server.utils import clean_state
from wslink.websocket import LinkProtocol

log = logging.getLogger(__name__)

#: Methods nobody may call from a browser: they stop the whole server.
NEVER = ("application.exit", "application.exit.later")
#: Methods that change the workspace (state edits, button handlers, the shared camera).
CHANGES = ("trame.state.update", "trame.trigger", "viewport.mouse.", "viewport.camera.", "viewport.axes.")


class _Listener(LinkProtocol):
    """Hears connections open and close; registered once per server start."""

    def __init__(self, gate):
        super().__init__()
        self.gate = gate

    def onConnect(self, request, client_id):  # noqa: N802 - wslink's name
        self.gate.connected(self, client_id, getattr(request, "remote", "") or "")

    def onClose(self, client_id):  # noqa: N802 - wslink's name
        self.gate.on_close(client_id)


class Gate:
    """Refuses workspace changes from connections that may not edit.

    Parameters
    ----------
    server : trame_server.Server
        The app's server (the gate installs itself when it starts).
    may_change : callable
        ``may_change(conn, method, args) -> bool`` for a call in :data:`CHANGES`.
    on_close : callable
        ``on_close(conn)`` when a connection goes away.
    """

    def __init__(self, server, may_change, on_close):
        self.server, self.may_change, self.on_close = server, may_change, on_close
        self.handler = None
        self.origins = {}
        server.add_protocol_to_configure(lambda protocol: protocol.registerLinkProtocol(_Listener(self)))

    def connected(self, link, conn: str, origin: str) -> None:
        self.origins[conn] = str(origin)[:60]
        if self.handler is None:
            self.handler = getattr(link.publish, "__self__", None)
            table = getattr(self.handler, "functionMap", None)
            if not isinstance(table, dict):
                log.warning("heatsoak: cannot tell browser tabs apart with this wslink; edits are refused")
                return
            for uri, (obj, func) in list(table.items()):
                if uri in NEVER or uri.startswith(CHANGES):
                    table[uri] = (obj, self._guard(uri, func))

    def sender(self) -> str | None:
        """The connection whose message is being handled now (None when unknown)."""
        web_app = getattr(self.handler, "web_app", None)
        return getattr(web_app, "last_active_client_id", None)

    def _guard(self, uri: str, func):
        def guarded(obj, *args, **kwargs):
            conn = self.sender()
            if uri not in NEVER and self.may_change(conn, uri, args):
                if uri == "trame.trigger":
                    return _quiet(lambda: func(obj, *args, **kwargs), args[0] if args else "")
                return func(obj, *args, **kwargs)
            log.info("heatsoak: %s from a watching tab refused", uri)
            if uri == "trame.state.update" and args:
                self._send_back(conn, args[0])
            return None

        return guarded

    def _send_back(self, conn, changes) -> None:
        """Give a refused tab the workspace's values of the keys it tried to change."""
        state = self.server.state
        keys = [c.get("key") for c in changes if isinstance(c, dict)] if isinstance(changes, list) else []
        values = {k: state[k] for k in keys if isinstance(k, str) and k in state}
        if values and conn is not None:
            self.handler.publish("trame.state.topic", clean_state(values)[0], client_id=conn)


async def _quiet(call, name):
    """What ``call()`` (a button handler) returns; a request it cannot take (arguments of the wrong kind
    or number, sent by a tampered page) is logged as one line instead of a traceback, answered with nothing."""
    try:
        result = call()
        return await result if inspect.isawaitable(result) else result
    except (TypeError, ValueError, KeyError, IndexError, AttributeError) as exc:
        log.warning("heatsoak: request %.60r not taken (%s: %.200s)", name, type(exc).__name__, exc)
        return None
