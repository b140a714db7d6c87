"""The line overview's web application (Starlette): GET only, nothing written.

Routes: ``/`` the page, ``/part`` its refreshing part (what ``line.js`` fetches every
:data:`~acquire.web.page.REFRESH_S` seconds), ``/line.css`` and ``/line.js``. Any other method
is answered 405. Every answer carries a Content-Security-Policy that allows only this server's
own script and style sheet (no inline script runs even if one slipped into the page) and forbids
framing. The store is read at most once per :data:`READ_EVERY_S` however many screens watch.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

from starlette.applications import Starlette
from starlette.requests import Request
from starlette.responses import HTMLResponse, Response
from starlette.routing import Route

from acquire.errors import StoreError
from acquire.web.overview import LineOverview
from acquire.web.page import render_main, render_page, render_problem

#: Seconds a reading of the store is reused for further requests.
READ_EVERY_S = 1.0
STATIC = Path(__file__).with_name("static")
HEADERS = {
    "Content-Security-Policy": (
        "default-src 'none'; script-src 'self'; style-src 'self'; connect-src 'self'; "
        "img-src 'self'; frame-ancestors 'none'; base-uri 'none'; form-action 'none'"
    ),
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
    "Cache-Control": "no-store",
}


class _Reader:
    """The newest main part of the page, read again when older than :data:`READ_EVERY_S`."""

    def __init__(self, read: Callable[[], LineOverview]) -> None:
        self._read = read
        self._lock = threading.Lock()
        self._html = ""
        self._at = -float("inf")

    def main(self) -> str:
        with self._lock:
            if time.monotonic() - self._at >= READ_EVERY_S:
                try:
                    self._html = render_main(self._read())
                except StoreError as exc:
                    self._html = render_problem(str(exc))
                self._at = time.monotonic()
            return self._html


def make_app(read: Callable[[], LineOverview], store_shown: str) -> Starlette:
    """The application: ``read()`` gives the line as the store holds it now (it is called on
    a worker thread); ``store_shown`` names the store on the page."""
    reader = _Reader(read)
    css = (STATIC / "line.css").read_text(encoding="utf-8")
    js = (STATIC / "line.js").read_text(encoding="utf-8")

    def page(_request: Request) -> Response:
        return HTMLResponse(render_page(reader.main(), store_shown), headers=HEADERS)

    def part(_request: Request) -> Response:
        return HTMLResponse(reader.main(), headers=HEADERS)

    def fixed(text: str, media: str) -> Callable[[Request], Any]:
        def serve(_request: Request) -> Response:
            return Response(text, media_type=media, headers=HEADERS)

        return serve

    routes = [
        Route("/", page, methods=["GET"]),
        Route("/part", part, methods=["GET"]),
        Route("/line.css", fixed(css, "text/css; charset=utf-8"), methods=["GET"]),
        Route("/line.js", fixed(js, "text/javascript; charset=utf-8"), methods=["GET"]),
    ]
    return Starlette(routes=routes)
