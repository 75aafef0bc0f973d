"""A bare pyvista + trame mesh viewer with the heat panel mounted: ``heatsoak ui``.

The viewer itself knows nothing about heat: it has a plotter, a 3D view and
a layout; :func:`heatsoak.plugin.mount` adds the panel. The command binds
127.0.0.1 unless told otherwise and then requires an access key.
"""

from __future__ import annotations

import logging
import os
import sys
from pathlib import Path

from heatsoak.core.errors import InputError
from heatsoak.plugin import startup
from heatsoak.plugin.access import decide_access
from heatsoak.plugin.load import listing

#: The case opened when ``heatsoak ui`` is given no file (from a source checkout).
MESHES = Path(__file__).resolve().parent.parent / "meshes"
DEMO_CASE = MESHES / "platen_warmup.toml"


def default_input() -> Path:
    """The demo case opened when no file is given."""
    return DEMO_CASE


def build_app(server, input_path=None, data_dir=None, work_dir=None, view_mode: str = "server"):
    """Lay out the bare viewer on ``server`` and mount the heat panel; returns the panel."""
    from heatsoak.plugin.panel import mount
    from heatsoak.plugin.pvtrame import new_plotter
    from heatsoak.plugin.results.layout import VIEW_SHOWN, curves, player, run_bar
    from heatsoak.plugin.session.layout import locked
    from heatsoak.plugin.whatif.layout import build as live_bar
    from trame.ui.vuetify3 import VAppLayout
    from trame.widgets import html
    from trame.widgets import vuetify3 as v3

    plotter = new_plotter()
    heat = mount(server, plotter, data_dir=data_dir, work_dir=work_dir, view_mode=view_mode)
    server.state.trame__title = "heatsoak"
    with VAppLayout(server, full_height=True) as layout:
        with v3.VAppBar(density="compact", color="#23332f", flat=True):
            v3.VAppBarTitle("heatsoak · transient heat in solids", classes="text-body-1")
            v3.VSpacer()
            html.Span("Engineering estimates: check them, and follow local codes.",
                      classes="text-caption mr-4 hs-bar-note")
        with v3.VNavigationDrawer(width=420, permanent=True, classes="hs-drawer", id="hs-setup-drawer"):
            heat.setup_ui()
        with v3.VNavigationDrawer(width=300, permanent=True, location="right", classes="hs-drawer hs-runs-drawer"):
            heat.runs_ui()
        with v3.VMain(classes="hs-main"):
            with html.Div(classes="d-flex flex-column", style="height: 100%"):
                with locked():
                    run_bar(heat)
                    live_bar(heat)
                with html.Div(classes="hs-view flex-grow-1", v_show=VIEW_SHOWN,
                              style="position: relative"):
                    heat.view_ui()
                with locked():
                    player(heat)
                    curves(heat)
    heat.layout = layout
    if input_path:
        heat.open_path(Path(input_path))
    return heat


#: Loggers that report a browser tab closed while the server was still writing to it.
CLOSE_NOISE_LOGGERS = ("aiohttp.server", "aiohttp.web", "asyncio", "wslink.protocol")


class ClosedConnectionFilter(logging.Filter):
    """Drops the tracebacks logged when a browser goes away in the middle of a message: a closed
    connection is a normal end of a session, not an error of the server.

    The web-socket layer logs an error of a call as three records ("Exception raised", the
    exception's repr, the traceback text); those of a closed connection are dropped, the others
    are kept, the first two joined in one line.
    """

    def __init__(self):
        super().__init__()
        self._pending = self._drop_trace = False

    def filter(self, record: logging.LogRecord) -> bool:
        exc = record.exc_info[1] if record.exc_info else None
        if isinstance(exc, ConnectionResetError):
            return False
        if not record.name.startswith("wslink"):
            return True
        msg = record.getMessage()
        if msg == "Exception raised":
            self._pending = True
            return False
        if self._pending:
            self._pending = False
            if "ConnectionResetError" in msg:
                self._drop_trace = True
                return False
            record.msg, record.args = f"Exception raised: {msg}", ()
            return True
        if self._drop_trace:
            self._drop_trace = False
            return not msg.startswith("Traceback")
        return True


def quiet_closed_connections() -> None:
    """Install one :class:`ClosedConnectionFilter` on each of the web server's loggers (once)."""
    for name in CLOSE_NOISE_LOGGERS:
        log = logging.getLogger(name)
        if not any(isinstance(f, ClosedConnectionFilter) for f in log.filters):
            log.addFilter(ClosedConnectionFilter())


def _argv_for_trame(args, key) -> list:
    """The options trame's own parser reads at start (it parses sys.argv)."""
    argv = ["heatsoak-ui", "--host", args.host, "--port", str(args.port), "--timeout", "0"]
    if args.server:
        argv.append("--server")
    if key:
        argv += ["--authKey", key]
    return argv


def cmd_ui(args) -> int:
    """``heatsoak ui [input] [--data-dir] [--work-dir] [--port] [--host] [--key-file] [--server]``.

    Everything that can stop the start (port, host, key, data folder, input file) is checked
    before the web server starts, each as one line and exit 2; a temporary work folder is removed
    when the server stops.
    """
    access = decide_access(args.host, args.key_file)
    args.port = startup.check_port(access.host, args.port)
    input_path = Path(args.input) if args.input else default_input()
    if args.data_dir:
        data_dir = startup.check_data_dir(args.data_dir)
    else:
        data_dir = input_path.resolve().parent if input_path.is_file() else Path.cwd().resolve()
    if not input_path.is_file():
        raise InputError(f"{input_path}: no such mesh or case file")
    os.environ.setdefault("TRAME_WS_MAX_MSG_SIZE", str(listing.MAX_UPLOAD_BYTES + 1_000_000))
    from trame.app import get_server

    work = startup.WorkFolder.open(getattr(args, "work_dir", None))
    try:
        server = get_server("heatsoak", client_type="vue3")
        # Server-side rendering is the default; HEATSOAK_UI_VIEW=client renders with vtk.js in the browser.
        build_app(server, input_path=input_path, data_dir=data_dir, work_dir=work.path,
                  view_mode=os.environ.get("HEATSOAK_UI_VIEW", "server"))
        print(access.notice(args.port), work.notice(), sep="\n", flush=True)
        sys.argv = _argv_for_trame(args, access.key)
        quiet_closed_connections()
        server.start(host=access.host, port=args.port, timeout=0, open_browser=not args.server,
                     show_connection_info=False)
    finally:
        work.close()
    return 0
