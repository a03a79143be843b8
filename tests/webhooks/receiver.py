"""A real HTTP receiver on loopback (http.server in a thread) that records each POST."""

from __future__ import annotations

import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer


@dataclass
class Received:
    """One POST as it arrived."""

    headers: dict[str, str]
    body: bytes


@dataclass
class Receiver:
    """What the server got, and the answers it will give (status, delay in seconds)."""

    url: str = ""
    got: list[Received] = field(default_factory=list)
    plan: list[tuple[int, float]] = field(default_factory=list)  # consumed first to last
    lock: threading.Lock = field(default_factory=threading.Lock)

    def next_answer(self) -> tuple[int, float]:
        """The planned answer for the next POST (200 at once when none is planned)."""
        with self.lock:
            return self.plan.pop(0) if self.plan else (200, 0.0)


@contextmanager
def receiver() -> Iterator[Receiver]:
    """Serve on 127.0.0.1 (a free port) until the block ends."""
    rec = Receiver()

    class Handler(BaseHTTPRequestHandler):
        def do_POST(self) -> None:
            size = int(self.headers.get("Content-Length", "0"))
            body = self.rfile.read(size)
            status, delay = rec.next_answer()
            with rec.lock:
                rec.got.append(Received({k.lower(): v for k, v in self.headers.items()}, body))
            if delay:
                time.sleep(delay)
            try:
                self.send_response(status)
                self.send_header("Content-Length", "0")
                self.end_headers()
            except OSError:
                pass  # the client gave up (timeout)

        def log_message(self, format: str, *args: object) -> None:
            pass

    server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
    server.daemon_threads = True
    rec.url = f"http://127.0.0.1:{server.server_address[1]}/hooks/lk"
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield rec
    finally:
        server.shutdown()
        server.server_close()
