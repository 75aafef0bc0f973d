"""Big files made by export jobs, handed to the browser over plain HTTP, once each.

A zip of a big run is hundreds of MB. Sent through the WebSocket like the
small exports, it held the UI's process and the page for about as long as it
took to make (150 MB: 18 s); over HTTP the browser streams it to disk and the
server sends it from the file a chunk at a time.

Each file gets an unguessable one-time address (a token of 32 random bytes),
told only to the page over the WebSocket, which is the part a key file guards:
the address is as secret as the key. The file is removed once sent.
"""

from __future__ import annotations

import asyncio
import os
import secrets
from pathlib import Path

#: Address prefix of the files handed out (relative to the page).
ROUTE = "hs-download"
#: Bytes read from the file per write to the browser.
CHUNK_BYTES = 1 << 20


def register(panel) -> None:
    """Add the download route to the web server when it binds (before it starts)."""
    panel.handouts = {}

    def bind(wslink_server):
        from aiohttp import web

        async def send(request):
            return await send_file(web, request, panel.handouts.pop(request.match_info["token"], None))

        wslink_server.app.router.add_get(f"/{ROUTE}/{{token}}", send)

    panel.ctrl.on_server_bind.add(bind)


def offer(panel, path: Path, name: str) -> str:
    """A one-time address (relative to the page) of the file ``path``, saved by the browser as ``name``;
    a file offered before and not yet taken is removed."""
    for old, _ in panel.handouts.values():  # one waiting at a time: an older one not taken goes
        old.unlink(missing_ok=True)
    token = secrets.token_urlsafe(32)
    panel.handouts = {token: (Path(path), name)}
    return f"{ROUTE}/{token}"


async def send_file(web, request, item):
    """Stream ``item`` = (path, name) as an attachment in chunks (read off the event loop), then remove
    the file; 404 for an unknown token."""
    if item is None:
        raise web.HTTPNotFound(text="this download was taken already, or never existed: export again")
    path, name = item
    try:
        src = path.open("rb")
    except OSError:
        raise web.HTTPNotFound(text=f"{name} is gone from the work folder: export again") from None
    loop = asyncio.get_running_loop()
    response = web.StreamResponse(headers={"Content-Type": "application/octet-stream", "Cache-Control": "no-store",
                                           "Content-Disposition": f'attachment; filename="{name}"'})
    response.content_length = os.fstat(src.fileno()).st_size
    try:
        await response.prepare(request)
        while chunk := await loop.run_in_executor(None, src.read, CHUNK_BYTES):
            await response.write(chunk)
        await response.write_eof()
    finally:
        src.close()
        path.unlink(missing_ok=True)
    return response
