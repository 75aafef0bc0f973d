"""The ownership rule of one workspace, as plain data (no web code): one owner, every other
browser connection watches until it takes over."""

from __future__ import annotations

from dataclasses import dataclass, field

from heatsoak.plugin.access import is_loopback


@dataclass
class Seats:
    """Browser connections of one workspace and which one may edit it.

    The first connection that says hello owns the workspace; later ones watch. A watcher takes
    over only when asked to, and the owner it replaces becomes a watcher that is told so. When
    the owner goes away the workspace is free: the next hello, or a take-over, claims it.

    Attributes
    ----------
    owner : str or None
        Connection id of the owner.
    labels : dict
        Connection id -> the name shown for it ("tab 2", "tab 3 from 10.0.0.7").
    lost : str
        Label of the tab that last lost control through a take-over ("" if none).
    """

    owner: str | None = None
    labels: dict = field(default_factory=dict)
    lost: str = ""
    _count: int = 0

    def hello(self, conn: str, origin: str = "") -> str:
        """A tab has loaded: name it, and make it the owner when nobody owns the workspace."""
        label = self._name(conn, origin)
        if self.owner is None:
            self.owner = conn
        return label

    def take_over(self, conn: str | None, origin: str = "") -> str:
        """The tab on ``conn`` asks for control (a tab that reconnected is named anew); the owner it
        replaces is remembered in :attr:`lost`. Returns the tab's name ("" for no connection)."""
        if conn is None:
            return ""
        label = self._name(conn, origin)
        if self.owner not in (None, conn):
            self.lost = self.labels.get(self.owner, "")
        self.owner = conn
        return label

    def _name(self, conn: str, origin: str) -> str:
        if conn not in self.labels:
            self._count += 1
            remote = origin and not is_loopback(origin)
            self.labels[conn] = f"tab {self._count}" + (f" from {origin}" if remote else "")
        return self.labels[conn]

    def closed(self, conn: str) -> None:
        """A connection went away; the workspace is free when it was the owner's."""
        self.labels.pop(conn, None)
        if self.owner == conn:
            self.owner = None

    def may_edit(self, conn: str | None) -> bool:
        """Whether messages from ``conn`` may change the workspace."""
        return conn is not None and conn == self.owner

    @property
    def owner_label(self) -> str:
        return self.labels.get(self.owner, "") if self.owner else ""
