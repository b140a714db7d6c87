"""Serve the line overview page: every station writing to the store, at a glance.

Shows, for each station that has run against the store (`acquire station` keeps its state
there): whether it is running, blocked (and why) or stopped, or silent (no word for over a
minute while not stopped); its operator, lot and plan; how many units of its lot it tested and
their final yield (the numbers `acquire lot LOT --station NAME` reports); its latest units with
their outcomes; and stale or out-of-control references or check standard. Below, each lot's
final yield over time, at every station. The page updates itself every 2 seconds; it is made to
be read from a few metres on a wall screen.

The page only reads: the store is opened read-only (SQLite's read-only mode; a PostgreSQL
session that refuses writes), and the server answers GET alone. It has no login, so it is
served on 127.0.0.1 (this computer) unless --host names another address together with
--open-to-network; then anyone who reaches that address sees the line's names and numbers.
Stop it with Ctrl-C.
"""

from __future__ import annotations

import argparse

from acquire.commands.options import add_store

HELP = "serve a read-only page showing every station of the line, updating itself"
#: The page's port unless --port says otherwise.
DEFAULT_PORT = 8750


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_store(parser)
    parser.add_argument(
        "--port",
        type=int,
        default=DEFAULT_PORT,
        help=f"TCP port of the page (default {DEFAULT_PORT}; 0 picks a free one)",
    )
    parser.add_argument(
        "--host",
        default="127.0.0.1",
        help="address to serve on (default 127.0.0.1, this computer only); another needs "
        "--open-to-network",
    )
    parser.add_argument(
        "--open-to-network",
        action="store_true",
        help="allow --host to be an address other computers reach (the page has no login)",
    )


def _loopback(host: str) -> bool:
    import ipaddress

    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def _listen(host: str, port: int):
    """A listening socket on ``host``:``port``, or an InputError saying what to change."""
    import socket

    from acquire.errors import InputError

    if not 0 <= port <= 65535:
        raise InputError(f"--port {port} is not a TCP port: give 1 to 65535 (0: any free one)")
    try:
        infos = socket.getaddrinfo(host, port, type=socket.SOCK_STREAM, flags=socket.AI_PASSIVE)
    except socket.gaierror as exc:
        raise InputError(f"--host {host!r} is not an address of this computer ({exc})") from None
    family, kind, proto, _, address = infos[0]
    sock = socket.socket(family, kind, proto)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    try:
        sock.bind(address)
    except OSError as exc:
        sock.close()
        raise InputError(
            f"cannot serve on {host}:{port} ({exc.strerror}): give another --port, or stop "
            "what uses it"
        ) from None
    sock.listen(64)
    sock.set_inheritable(True)
    return sock


def run(args: argparse.Namespace) -> int:
    import uvicorn

    from acquire.errors import InputError
    from acquire.store.read_only import open_read_only
    from acquire.web.app import make_app
    from acquire.web.overview import read_overview

    host = args.host.strip()
    if not _loopback(host) and not args.open_to_network:
        raise InputError(
            f"--host {host} would show the page to other computers, and it has no login: add "
            "--open-to-network to do so knowingly, or leave --host out (127.0.0.1)"
        )
    with open_read_only(args.store) as store:
        sock = _listen(host, args.port)
        port = sock.getsockname()[1]
        shown = f"[{host}]" if ":" in host else host
        if not _loopback(host):
            print(
                f"WARNING: the page is served on {shown}:{port} to every computer that reaches "
                "it, without a login: anyone there sees the line's names and numbers",
                flush=True,
            )
        print(f"line overview of {store.url} at http://{shown}:{port}/ (Ctrl-C stops)", flush=True)
        app = make_app(lambda: read_overview(store), store.url)
        config = uvicorn.Config(app, log_level="warning", access_log=False, lifespan="off")
        server = uvicorn.Server(config)
        try:
            server.run(sockets=[sock])
        finally:
            sock.close()
    return 0
