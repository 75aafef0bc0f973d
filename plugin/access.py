"""Who may connect: loopback by default, an access key on any other interface."""

from __future__ import annotations

import ipaddress
import secrets
from dataclasses import dataclass
from pathlib import Path

from heatsoak.core.errors import InputError

#: Host names that only accept connections from this machine.
LOOPBACK_NAMES = ("localhost", "127.0.0.1", "::1")


@dataclass(frozen=True)
class Access:
    """How the server is bound and protected.

    Attributes
    ----------
    host : str
        Interface to bind.
    key : str or None
        WebSocket access key; None on loopback without a key file.
    generated : bool
        True when the key was made up at start (print it for the user).
    """

    host: str
    key: str | None
    generated: bool = False

    def url(self, port: int) -> str:
        """The address to open, with the key when one is needed."""
        shown = "127.0.0.1" if self.host in ("0.0.0.0", "::") else self.host
        if ":" in shown:
            shown = f"[{shown}]"
        query = f"?secret={self.key}" if self.key else ""
        return f"http://{shown}:{port}/{query}"

    def notice(self, port: int) -> str:
        """What to tell the user at start."""
        if self.key is None:
            return f"heatsoak UI on {self.url(port)} (this machine only)"
        how = "generated for this session" if self.generated else "read from the key file"
        return (
            f"heatsoak UI on {self.url(port)}\n"
            f"Bound to {self.host}: other machines can reach it, so an access key is required "
            f"({how}); share the address above only with people who may use it."
        )


def is_loopback(host: str) -> bool:
    """True when ``host`` accepts connections from this machine only."""
    if host in LOOPBACK_NAMES:
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def read_key(path) -> str:
    """The access key stored in ``path`` (first line, stripped)."""
    path = Path(path)
    try:
        key = path.read_text(encoding="utf-8").strip().splitlines()[0].strip()
    except (OSError, IndexError):
        raise InputError(f"--key-file {path}: cannot read an access key from it") from None
    if len(key) < 12 or not key.replace("-", "").replace("_", "").isalnum():
        raise InputError(
            f"--key-file {path}: the key must be at least 12 letters, digits, '-' or '_' (got {len(key)} characters)"
        )
    return key


def decide_access(host: str, key_file=None) -> Access:
    """Access rules for binding ``host``.

    A key file is always honoured; without one, a key is generated whenever
    ``host`` is not loopback.
    """
    if not host:
        raise InputError("--host: give an interface address, e.g. 127.0.0.1")
    if key_file:
        return Access(host, read_key(key_file))
    if is_loopback(host):
        return Access(host, None)
    return Access(host, secrets.token_urlsafe(24), generated=True)
