"""Serving the page with uvicorn, so that stopping the server always leaves the bench safe.

The first SIGINT/SIGTERM stops a run in progress at once (before uvicorn waits for open pages
to go), the application's shutdown waits until the runner has switched the supply off, and
:func:`serve` waits for it once more on the way out, whatever ended the server.
"""

from __future__ import annotations

import signal
import socket
import threading
import time
from pathlib import Path
from typing import Any

import uvicorn

from benchgate.web.app import create_app
from benchgate.web.desk import Desk
from benchgate.web.guard import Guard


class PageServer(uvicorn.Server):
    """uvicorn's server, telling the desk to stop the run the moment a stop signal arrives."""

    def __init__(self, config: uvicorn.Config, desk: Desk):
        super().__init__(config)
        self.desk = desk

    def handle_exit(self, sig: int, frame: Any) -> None:
        self.desk.begin_shutdown()
        super().handle_exit(sig, frame)


def bind(host: str, port: int) -> socket.socket:
    """A listening socket on ``host:port`` (port 0: any free port)."""
    family = socket.AF_INET6 if ":" in host else socket.AF_INET
    sock = socket.socket(family, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    try:
        sock.bind((host.strip("[]"), port))
    except OSError:
        sock.close()
        raise
    sock.listen(64)
    sock.set_inheritable(True)
    return sock


def url_of(sock: socket.socket) -> str:
    host, port = sock.getsockname()[:2]
    return f"http://[{host}]:{port}/" if ":" in host else f"http://{host}:{port}/"


def make_server(desk: Desk, guard: Guard, reports_dir: Path, *, log_level: str = "warning") -> PageServer:
    app = create_app(desk, guard, reports_dir=reports_dir)
    config = uvicorn.Config(app, log_level=log_level, access_log=False, lifespan="on",
                            timeout_graceful_shutdown=5)
    return PageServer(config, desk)


def serve(desk: Desk, guard: Guard, sock: socket.socket, reports_dir: Path, *,
          log_level: str = "warning") -> bool:
    """Serve until stopped (Ctrl-C, SIGTERM); True when the supply was confirmed off at the end."""
    server = make_server(desk, guard, reports_dir, log_level=log_level)
    main = threading.current_thread() is threading.main_thread()
    terminated: list[int] = []

    def on_term(signum: int, frame: Any) -> None:  # SIGTERM, passed on by uvicorn after its shutdown
        terminated.append(signum)
        raise SystemExit(128 + signum)

    previous = signal.signal(signal.SIGTERM, on_term) if main else None
    try:
        server.run(sockets=[sock])
    except KeyboardInterrupt:
        pass  # Ctrl-C itself, raised again by uvicorn once it had shut down
    except SystemExit:
        if not terminated:  # uvicorn's own exit (it could not start): not ours to hide
            raise
    finally:
        safe = desk.shutdown()
        if main:
            signal.signal(signal.SIGTERM, previous)
    return safe


class ServerThread:
    """The page served from a background thread (tests, embedding); :meth:`close` stops it safely."""

    def __init__(self, desk: Desk, guard: Guard, sock: socket.socket, reports_dir: Path):
        self.desk = desk
        self.url = url_of(sock)
        self.server = make_server(desk, guard, reports_dir)
        self._thread = threading.Thread(target=self.server.run, kwargs={"sockets": [sock]},
                                        name="benchgate-page", daemon=True)
        self._sock = sock

    def start(self, timeout: float = 10.0) -> ServerThread:
        self._thread.start()
        deadline = time.monotonic() + timeout
        while not self.server.started:  # uvicorn offers a flag, not an event: wait on it with a deadline
            if not self._thread.is_alive() or time.monotonic() > deadline:
                raise RuntimeError("the page's server did not start")
            self._thread.join(0.01)
        return self

    def close(self, timeout: float = 30.0) -> bool:
        self.desk.begin_shutdown()
        self.server.should_exit = True
        self._thread.join(timeout)
        return self.desk.shutdown()
