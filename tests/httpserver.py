"""A tiny threaded HTTP file server for the remote-input tests (loopback only).

Serves one folder on ``127.0.0.1`` at a free port, answers ``HEAD`` and
``GET`` with byte ranges the way GDAL's ``/vsicurl/`` expects:

* no ``Range`` header -> ``200`` with the whole file;
* one range ``bytes=a-b`` (also ``a-`` and ``-n``) -> ``206`` with
  ``Content-Range``;
* several ranges ``bytes=a-b,c-d`` (GDAL_HTTP_MULTIRANGE) -> ``206``
  ``multipart/byteranges``;
* an unsatisfiable range -> ``416``; a missing file -> ``404``.

Every request is recorded (method, path, Range header, status, file bytes
sent) in :attr:`FileServer.requests` for assertions.  Use it as a context
manager; ``stop()`` shuts the server down and joins its thread (bounded).
"""

from __future__ import annotations

import os
import threading
import urllib.parse
import uuid
from dataclasses import dataclass
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

__all__ = ["FileServer", "Request"]


@dataclass
class Request:
    method: str
    path: str            # URL path without the query string
    range: str | None    # the Range header as sent
    status: int
    sent: int            # bytes of the file sent in the body (0 for HEAD and errors)


def _parse_ranges(header: str, size: int) -> list[tuple[int, int]] | None:
    """Inclusive (start, end) pairs of a ``bytes=`` header; None when malformed/unsatisfiable."""
    unit, _, spec = header.partition("=")
    if unit.strip().lower() != "bytes" or not spec.strip():
        return None
    out = []
    for part in spec.split(","):
        part = part.strip()
        a, sep, b = part.partition("-")
        if not sep:
            return None
        try:
            if a == "":                       # suffix: last n bytes
                n = int(b)
                if n <= 0:
                    continue
                start, end = max(0, size - n), size - 1
            else:
                start = int(a)
                end = int(b) if b else size - 1
        except ValueError:
            return None
        if start >= size or end < start:
            continue
        out.append((start, min(end, size - 1)))
    return out or None


class _Handler(BaseHTTPRequestHandler):
    protocol_version = "HTTP/1.1"     # keep-alive, as curl expects
    server: "_Server"

    def log_message(self, fmt, *args):   # quiet
        pass

    def do_HEAD(self):
        self._serve(body=False)

    def do_GET(self):
        self._serve(body=True)

    def _record(self, status: int, sent: int) -> None:
        path = urllib.parse.urlsplit(self.path).path
        with self.server.lock:
            self.server.requests.append(Request(self.command, path, self.headers.get("Range"), status, sent))

    def _plain(self, status: int, text: str, body: bool, extra: dict | None = None) -> None:
        data = text.encode()
        self._record(status, 0)      # before answering, so a client that returns at once sees it recorded
        self.send_response(status)
        self.send_header("Content-Type", "text/plain")
        self.send_header("Content-Length", str(len(data)))
        for k, v in (extra or {}).items():
            self.send_header(k, v)
        self.end_headers()
        if body:
            self.wfile.write(data)

    def _serve(self, body: bool) -> None:
        rel = urllib.parse.unquote(urllib.parse.urlsplit(self.path).path).lstrip("/")
        root = self.server.root
        target = (root / rel).resolve()
        if root not in target.parents or not target.is_file():
            self._plain(404, "not found\n", body)
            return
        size = target.stat().st_size
        header = self.headers.get("Range")
        if header is None:
            self.send_response(200)
            self.send_header("Content-Type", "application/octet-stream")
            self.send_header("Accept-Ranges", "bytes")
            self.send_header("Content-Length", str(size))
            self.end_headers()
            sent = 0
            if body:
                with open(target, "rb") as f:
                    data = f.read()
                self.wfile.write(data)
                sent = len(data)
            self._record(200, sent)
            return
        ranges = _parse_ranges(header, size)
        if ranges is None:
            self._plain(416, "range not satisfiable\n", body, {"Content-Range": f"bytes */{size}"})
            return
        with open(target, "rb") as f:
            parts = []
            for a, b in ranges:
                f.seek(a)
                parts.append((a, b, f.read(b - a + 1)))
        if len(parts) == 1:
            a, b, data = parts[0]
            self.send_response(206)
            self.send_header("Content-Type", "application/octet-stream")
            self.send_header("Accept-Ranges", "bytes")
            self.send_header("Content-Range", f"bytes {a}-{b}/{size}")
            self.send_header("Content-Length", str(len(data)))
            self.end_headers()
            if body:
                self.wfile.write(data)
            self._record(206, len(data) if body else 0)
            return
        boundary = uuid.uuid4().hex
        chunks = []
        for a, b, data in parts:
            chunks.append(f"--{boundary}\r\nContent-Type: application/octet-stream\r\n"
                          f"Content-Range: bytes {a}-{b}/{size}\r\n\r\n".encode() + data + b"\r\n")
        chunks.append(f"--{boundary}--\r\n".encode())
        payload = b"".join(chunks)
        self.send_response(206)
        self.send_header("Content-Type", f"multipart/byteranges; boundary={boundary}")
        self.send_header("Accept-Ranges", "bytes")
        self.send_header("Content-Length", str(len(payload)))
        self.end_headers()
        if body:
            self.wfile.write(payload)
        self._record(206, sum(len(d) for _, _, d in parts) if body else 0)


class _Server(ThreadingHTTPServer):
    daemon_threads = True
    allow_reuse_address = True

    def __init__(self, root: Path):
        super().__init__(("127.0.0.1", 0), _Handler)
        self.root = Path(root).resolve()
        self.requests: list[Request] = []
        self.lock = threading.Lock()


class FileServer:
    """Serve ``root`` on 127.0.0.1 at a free port while inside ``with``."""

    def __init__(self, root: str | os.PathLike):
        self.root = Path(root)
        self._server: _Server | None = None
        self._thread: threading.Thread | None = None

    def start(self) -> "FileServer":
        self._server = _Server(self.root)
        self._thread = threading.Thread(target=self._server.serve_forever, kwargs={"poll_interval": 0.1},
                                        name="test-http-server", daemon=True)
        self._thread.start()
        return self

    def stop(self) -> None:
        if self._server is not None:
            self._server.shutdown()
            self._server.server_close()
            if self._thread is not None:
                self._thread.join(timeout=10)
            self._server = None

    def __enter__(self) -> "FileServer":
        return self.start()

    def __exit__(self, *exc) -> None:
        self.stop()

    @property
    def port(self) -> int:
        assert self._server is not None, "server not started"
        return self._server.server_address[1]

    def url(self, name: str = "") -> str:
        return f"http://127.0.0.1:{self.port}/{name.lstrip('/')}"

    @property
    def requests(self) -> list[Request]:
        assert self._server is not None, "server not started"
        with self._server.lock:
            return list(self._server.requests)

    def clear(self) -> None:
        with self._server.lock:
            self._server.requests.clear()

    def for_file(self, name: str) -> list[Request]:
        want = "/" + name.lstrip("/")
        return [r for r in self.requests if r.path == want]

    def bytes_sent(self, name: str) -> int:
        return sum(r.sent for r in self.for_file(name))
