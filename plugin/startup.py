"""What ``heatsoak ui`` checks before it serves: the port, the data folder, the work folder.

Each problem is an :class:`~heatsoak.core.errors.InputError` naming the option and what is
allowed, so the command prints one line and exits 2 instead of a traceback from the web server.
"""

from __future__ import annotations

import os
import shutil
import socket
import stat
import tempfile
from dataclasses import dataclass
from pathlib import Path

from heatsoak.core.errors import InputError


def check_port(host: str, port) -> int:
    """The port number of ``port`` (text or number); refused outside 1-65535 or when already
    taken on ``host``.

    Raises
    ------
    InputError
        Naming ``--port`` (or ``--host`` when the address does not belong to this machine).
    """
    text = str(port).strip()
    if not (text.isascii() and text.isdigit()) or not 1 <= int(text) <= 65535:
        raise InputError(f"--port {text[:20]!r}: give a port number from 1 to 65535")
    port = int(text)
    try:
        family, kind, proto, _, address = socket.getaddrinfo(host, port, type=socket.SOCK_STREAM)[0]
    except (socket.gaierror, UnicodeError, ValueError):
        raise InputError(f"--host {host}: not a name or address this machine can bind") from None
    with socket.socket(family, kind, proto) as probe:
        probe.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)  # as the web server binds it
        try:
            probe.bind(address)
        except PermissionError:
            raise InputError(f"--port {port}: this user may not bind it (ports below 1024 need privileges); "
                             "choose a port above 1024") from None
        except OSError as exc:
            if exc.errno == 98:  # EADDRINUSE
                raise InputError(f"--port {port}: already in use on {host} (another heatsoak ui or program); "
                                 "choose another with --port") from None
            raise InputError(f"--host {host} --port {port}: cannot listen there ({exc.strerror})") from None
    return port


def check_data_dir(path) -> Path:
    """The data folder resolved; refused when it is missing, not a folder or unreadable."""
    text = str(path)
    if "\0" in text:
        raise InputError(f"--data-dir {text!r}: a folder name cannot hold a NUL character")
    folder = Path(os.path.realpath(text))
    try:
        mode = folder.stat().st_mode
    except OSError:
        raise InputError(f"--data-dir {text}: no such folder") from None
    if not stat.S_ISDIR(mode):
        raise InputError(f"--data-dir {text}: not a folder")
    if not os.access(folder, os.R_OK | os.X_OK):
        raise InputError(f"--data-dir {text}: this user may not list it")
    return folder


@dataclass
class WorkFolder:
    """Where uploads and run results go while the UI runs.

    Attributes
    ----------
    path : Path
        The folder.
    keep : bool
        True when the user named it (``--work-dir``): it is left in place at exit; a temporary
        one is removed by :meth:`close`.
    """

    path: Path
    keep: bool

    @classmethod
    def open(cls, named=None) -> WorkFolder:
        """The folder the user named (made if missing, kept at exit), or a new temporary one."""
        if named is None:
            return cls(Path(tempfile.mkdtemp(prefix="heatsoak-ui-")).resolve(), keep=False)
        folder = Path(named)
        try:
            folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputError(f"--work-dir {named}: cannot make the folder ({exc.strerror})") from None
        if not os.access(folder, os.W_OK | os.X_OK):
            raise InputError(f"--work-dir {named}: this user may not write into it")
        return cls(folder.resolve(), keep=True)

    def close(self) -> None:
        """Remove a temporary work folder with everything in it (a named one is kept)."""
        if not self.keep:
            shutil.rmtree(self.path, ignore_errors=True)

    def notice(self) -> str:
        """One line for the start message."""
        if self.keep:
            return f"Uploads and run results are kept in {self.path}"
        return (f"Uploads and run results go to {self.path}, removed when the UI stops "
                "(export what you need, or start with --work-dir DIR to keep them)")
