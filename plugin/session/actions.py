"""Handlers of the workspace's ownership: a tab says hello when it loads, a watcher takes over.

The first tab owns the workspace; a tab opened while it is owned watches (sees everything, changes
nothing: no run, cancel, open, upload, edit, export or camera move reaches the server from it) until
it explicitly takes over; the owner it replaces is told and watches from then on.
"""

from __future__ import annotations

from heatsoak.plugin.session.gate import Gate
from heatsoak.plugin.session.seats import Seats

#: Triggers a watching tab may call.
WATCHER_TRIGGERS = ("hs_hello", "hs_take_over")


def register(panel) -> None:
    """Ownership state (``hs_owner``, ``hs_lost``; the tab's own name ``hs_me`` stays in the browser)."""
    server, state = panel.server, panel.state
    seats = panel.seats = Seats()
    state.update({"hs_owner": "", "hs_lost": "", "hs_me": ""})
    state.client_only("hs_me")

    def publish():
        state.hs_owner, state.hs_lost = seats.owner_label, seats.lost

    def may_change(conn, method, args) -> bool:
        if method == "trame.trigger" and args and args[0] in WATCHER_TRIGGERS:
            return True
        return seats.may_edit(conn)

    def on_close(conn):
        seats.closed(conn)
        with state:
            publish()

    gate = panel.gate = Gate(server, may_change, on_close)

    @server.trigger("hs_hello")
    def hello():
        """A tab loaded: its name (kept in that tab only); it owns the workspace if nobody does."""
        conn = gate.sender()
        if conn is None:  # no connection to tell apart (the page is not served by wslink)
            return ""
        label = seats.hello(conn, gate.origins.get(conn, ""))
        publish()
        return label

    @server.trigger("hs_take_over")
    def take_over():
        """The asking tab becomes the owner; the one it replaces watches and is told. Returns the
        tab's name (a tab whose connection was renewed gets a new one)."""
        conn = gate.sender()
        label = seats.take_over(conn, gate.origins.get(conn, ""))
        publish()
        return label
