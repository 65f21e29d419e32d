"""The front: receives whole requests from clients, then hands them to the gunicorn workers.

gunicorn's sync workers read a request themselves, so a client that sends its headers
and then trickles its body holds a worker (two such clients froze a two-worker
instance). The front is one asyncio process in front of gunicorn (``lagwise serve``
starts both). It

* reads each request line, header block and body under a deadline
  (``LAGWISE_RECEIVE_SECONDS``) and a size limit (``LAGWISE_MAX_BODY_BYTES``, or
  ``LAGWISE_MAX_ARROW_BYTES`` for a multipart body, whose samples are an Arrow stream),
  holding no worker meanwhile; bodies above 256 KiB are spooled to a temporary file;
* answers ``GET /healthz`` itself (without Accept or with one allowing JSON; any other goes to a
  worker, which refuses it with 406 like every path), so liveness answers in milliseconds however busy the
  workers are;
* forwards only complete requests, with a ``Content-Length`` and an ``X-Request-ID``,
  over a private Unix socket, one connection per request, and relays the answer;
* turns every error that would not be a problem document (malformed HTTP, a request
  line or headers too long, a timeout, a worker killed mid-request, gunicorn's own HTML
  pages) into one.

HTTP/1.1 framing is parsed by h11 on both sides.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import os
import sys
import tempfile
import time
from dataclasses import dataclass
from typing import IO

import h11

from . import answers

READ_BLOCK = 1 << 16
SPOOL_BYTES = 256 * 1024
MAX_REQUEST_LINE = 8190
MAX_HEADER_FIELDS = 100
MAX_FIELD_BYTES = 8190
MAX_HEAD_BYTES = 64 * 1024
IDLE_SECONDS = 5.0  # keep-alive: how long an idle client connection stays open
LINGER_SECONDS = 2.0  # after a refusal, how long unread input is drained before closing
LIVENESS_PATHS = frozenset({b"/healthz"})
# Hop-by-hop fields (RFC 9110 §7.6.1) and the framing the front sets itself.
HOP_BY_HOP = frozenset(
    {
        b"connection",
        b"keep-alive",
        b"proxy-connection",
        b"te",
        b"trailer",
        b"transfer-encoding",
        b"upgrade",
        b"expect",
        b"content-length",
    }
)


@dataclass(frozen=True)
class FrontSettings:
    """Limits of the front.

    Attributes
    ----------
    upstream : str
        Path of gunicorn's Unix socket.
    max_body_bytes : int
        Largest body received (as sent, before any decoding), bytes.
    receive_seconds : float
        Time a client has to send one whole request, seconds.
    max_connections : int
        Client connections held at once.
    max_arrow_bytes : int
        Largest multipart/form-data body (samples as an Arrow stream), bytes; the larger
        of it and ``max_body_bytes`` applies to such bodies.
    """

    upstream: str
    max_body_bytes: int
    receive_seconds: float
    max_connections: int
    max_arrow_bytes: int = 0

    def body_limit(self, content_type: str | None) -> tuple[int, str]:
        """The body limit for a request of ``content_type`` and the variable that sets it."""
        multipart = (content_type or "").split(";")[0].strip().lower() == "multipart/form-data"
        if multipart and self.max_arrow_bytes > self.max_body_bytes:
            return self.max_arrow_bytes, "LAGWISE_MAX_ARROW_BYTES"
        return self.max_body_bytes, "LAGWISE_MAX_BODY_BYTES"


class Refusal(Exception):
    """A request refused by the front, answered with a problem document and the connection closed."""

    def __init__(self, kind: str, detail: str):
        super().__init__(detail)
        self.kind = kind
        self.detail = detail


class ClientGone(Exception):
    """The client closed its connection or went silent between requests."""


LEVELS = {"debug": 10, "info": 20, "warning": 30, "error": 40, "critical": 50}


def log(message: str, level: str = "info", **fields) -> None:
    """One JSON line on stderr, like the service's logs (never sample data), when ``level`` is at
    or above ``LAGWISE_LOG_LEVEL`` (default info)."""
    if LEVELS[level] < LEVELS.get(os.environ.get("LAGWISE_LOG_LEVEL", "info").lower(), LEVELS["info"]):
        return
    entry = {"time": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()), "level": level, "logger": "lagwise.front"}
    entry.update(message=message, **fields)
    print(json.dumps(entry, separators=(",", ":")), file=sys.stderr, flush=True)


class ClientConnection:
    """One client connection: h11's server side, fed from an asyncio stream under deadlines."""

    def __init__(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter):
        self.reader = reader
        self.writer = writer
        self.h11 = h11.Connection(h11.SERVER, max_incomplete_event_size=MAX_HEAD_BYTES)

    async def next_event(self, deadline: float):
        """The next h11 event, reading more input until ``deadline`` (loop time)."""
        loop = asyncio.get_running_loop()
        while True:
            try:
                event = self.h11.next_event()
            except h11.RemoteProtocolError as exc:
                kind = "headers-too-large" if exc.error_status_hint == 431 else "malformed-request"
                raise Refusal(kind, f"The request is not valid HTTP/1.1: {exc}.") from None
            if event is not h11.NEED_DATA:
                return event
            self._check_request_line()
            remaining = deadline - loop.time()
            if remaining <= 0:
                raise TimeoutError
            data = await asyncio.wait_for(self.reader.read(READ_BLOCK), remaining)
            self.h11.receive_data(data)

    def _check_request_line(self) -> None:
        if self.h11.their_state is not h11.IDLE:
            return
        pending = self.h11.trailing_data[0]
        if len(pending) > MAX_REQUEST_LINE and b"\n" not in pending[: MAX_REQUEST_LINE + 2]:
            raise Refusal("uri-too-long", f"The request line is longer than {MAX_REQUEST_LINE} bytes.")

    def has_pending_input(self) -> bool:
        return bool(self.h11.trailing_data[0])

    async def send(self, *events) -> None:
        for event in events:
            data = self.h11.send(event)
            if data:
                self.writer.write(data)
        await self.writer.drain()

    async def answer(self, status: int, headers: list[tuple[bytes, bytes]], body: bytes) -> None:
        """Send a whole small response to the current request."""
        await self.send(
            h11.Response(status_code=status, headers=headers, reason=answers.reason(status)),
            h11.Data(data=body),
            h11.EndOfMessage(),
        )

    async def write_final(self, status: int, headers: list[tuple[bytes, bytes]], body: bytes) -> None:
        """Write a last response directly (h11 cannot, before a request or after a protocol error)."""
        head = b"HTTP/1.1 %d %s\r\n" % (status, answers.reason(status))
        head += b"".join(b"%s: %s\r\n" % (name, value) for name, value in headers)
        with contextlib.suppress(OSError):
            self.writer.write(head + b"connection: close\r\n\r\n" + body)
            await self.writer.drain()

    async def close(self, linger: bool) -> None:
        """Close; after a refusal, drain what the client still sends so that it reads the answer (no reset)."""
        with contextlib.suppress(OSError, RuntimeError):
            if linger and self.writer.can_write_eof():
                self.writer.write_eof()
                with contextlib.suppress(asyncio.TimeoutError, OSError):
                    async with asyncio.timeout(LINGER_SECONDS):
                        while await self.reader.read(READ_BLOCK):
                            pass
            self.writer.close()
            await self.writer.wait_closed()


@dataclass
class ReceivedRequest:
    """A whole request, ready to forward."""

    method: bytes
    target: bytes
    headers: list[tuple[bytes, bytes]]
    body: IO[bytes]
    size: int
    request_id: str

    @property
    def path(self) -> str:
        return self.target.split(b"?", 1)[0].decode("latin-1")


class Front:
    """The asyncio server in front of gunicorn (see the module docstring)."""

    def __init__(self, settings: FrontSettings):
        self.settings = settings
        self.connections = 0
        self._handlers: set[asyncio.Task] = set()
        # not-ready refusals since the workers were last reached: the first is logged at info,
        # the rest (readiness polls while the workers start) at debug, their number once they answer.
        self.not_ready = 0

    async def drained(self, seconds: float) -> None:
        """Wait up to ``seconds`` for every client connection to finish."""
        if self._handlers:
            await asyncio.wait(set(self._handlers), timeout=seconds)

    async def handle(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        """Serve one client connection: requests one after the other (keep-alive)."""
        task = asyncio.current_task()
        if task is not None:
            self._handlers.add(task)
            task.add_done_callback(self._handlers.discard)
        client = ClientConnection(reader, writer)
        if self.connections >= self.settings.max_connections:
            status, headers, body = answers.problem(
                "overloaded",
                f"This instance holds {self.settings.max_connections} connections (LAGWISE_MAX_CONNECTIONS).",
                request_id=answers.request_id_for(None),
            )
            await client.write_final(status, headers + [(b"retry-after", b"1")], body)
            await client.close(linger=True)
            return
        self.connections += 1
        linger = False
        try:
            first = True
            while True:
                linger = await self._one_request(client, first)
                first = False
                if linger or client.h11.our_state is not h11.DONE or client.h11.their_state is not h11.DONE:
                    break
                client.h11.start_next_cycle()
        except (ClientGone, ConnectionError, asyncio.IncompleteReadError):
            pass
        finally:
            self.connections -= 1
            await client.close(linger)

    async def _one_request(self, client: ClientConnection, first: bool) -> bool:
        """Receive, forward and answer one request; True when the connection must close after a refusal."""
        loop = asyncio.get_running_loop()
        if not first and not client.has_pending_input():
            # Between requests a client may stay silent for IDLE_SECONDS; then the connection closes quietly.
            try:
                data = await asyncio.wait_for(client.reader.read(READ_BLOCK), IDLE_SECONDS)
            except TimeoutError:
                raise ClientGone from None
            if not data:
                raise ClientGone
            client.h11.receive_data(data)
        deadline = loop.time() + self.settings.receive_seconds
        request_id = answers.request_id_for(None)
        target = b""
        try:
            request = await self._receive(client, deadline)
            if request is None:
                raise ClientGone
            request_id, target = request.request_id, request.target
            if (
                request.method in (b"GET", b"HEAD")
                and request.path.encode() in LIVENESS_PATHS
                and answers.accepts(_accept(request.headers), ("application/json",))
            ):
                # Any other Accept goes to a worker, whose /healthz refuses it (406) like every path.
                request.body.close()
                status, headers, body = answers.alive(request_id)
                await client.answer(status, headers, b"" if request.method == b"HEAD" else body)
                return False
            await self._forward(client, request)
            return False
        except Refusal as refusal:
            kind, detail = refusal.kind, refusal.detail
        except TimeoutError:
            if client.h11.their_state is h11.IDLE and not client.has_pending_input():
                raise ClientGone from None
            kind = "request-timeout"
            detail = f"The request did not arrive within {self.settings.receive_seconds:g} s (LAGWISE_RECEIVE_SECONDS)."
        await self._refuse(client, kind, detail, target, request_id)
        return True

    async def _refuse(self, client: ClientConnection, kind: str, detail: str, target: bytes, request_id: str) -> None:
        instance = target.split(b"?", 1)[0].decode("latin-1")[:MAX_FIELD_BYTES]
        level, note = "info", {}
        if kind == "not-ready":
            self.not_ready += 1
            if self.not_ready == 1:
                note = {"note": "further not-ready refusals are logged at debug level until the workers are reached"}
            else:
                level = "debug"
        log("refused", level, request_id=request_id, problem=kind, path=instance, **note)
        status, headers, body = answers.problem(kind, detail, instance=instance, request_id=request_id)
        if client.h11.our_state in (h11.IDLE, h11.SEND_RESPONSE, h11.ERROR):
            await client.write_final(status, headers, body)

    async def _receive(self, client: ClientConnection, deadline: float) -> ReceivedRequest | None:
        """Read one whole request (None when the client closed before sending one)."""
        event = await client.next_event(deadline)
        if isinstance(event, h11.ConnectionClosed):
            return None
        assert isinstance(event, h11.Request)
        request_id = answers.request_id_for(_header(event.headers, b"x-request-id"))
        if len(event.target) > MAX_REQUEST_LINE:
            raise Refusal("uri-too-long", f"The request target is longer than {MAX_REQUEST_LINE} bytes.")
        if len(event.headers) > MAX_HEADER_FIELDS:
            raise Refusal("headers-too-large", f"The request has more than {MAX_HEADER_FIELDS} header fields.")
        if any(len(n) + len(v) + 2 > MAX_FIELD_BYTES for n, v in event.headers):
            raise Refusal("headers-too-large", f"A header field is longer than {MAX_FIELD_BYTES} bytes.")
        if sum(len(n) + len(v) + 4 for n, v in event.headers) > MAX_HEAD_BYTES:
            raise Refusal("headers-too-large", f"The header fields take more than {MAX_HEAD_BYTES} bytes.")
        declared = _header(event.headers, b"content-length")
        limit, name = self.settings.body_limit(_header(event.headers, b"content-type"))
        if declared is not None and int(declared) > limit:
            raise Refusal("body-too-large", f"The body exceeds the limit of {limit} bytes ({name}).")
        if client.h11.they_are_waiting_for_100_continue:
            await client.send(h11.InformationalResponse(status_code=100, headers=[], reason=b"Continue"))
        body: IO[bytes] = tempfile.SpooledTemporaryFile(max_size=SPOOL_BYTES)
        try:
            size = await self._receive_body(client, deadline, body, limit, name)
        except BaseException:
            body.close()
            raise
        body.seek(0)
        headers = [(n, v) for n, v in event.headers if n not in HOP_BY_HOP and n != b"x-request-id"]
        return ReceivedRequest(event.method, event.target, headers, body, size, request_id)

    async def _receive_body(
        self, client: ClientConnection, deadline: float, body: IO[bytes], limit: int, name: str
    ) -> int:
        """Write the body into ``body``, refusing more than ``limit`` bytes (set by ``name``); returns its size."""
        size = 0
        while True:
            part = await client.next_event(deadline)
            if isinstance(part, h11.Data):
                size += len(part.data)
                if size > limit:
                    raise Refusal("body-too-large", f"The body exceeds the limit of {limit} bytes ({name}).")
                body.write(part.data)
            elif isinstance(part, h11.EndOfMessage):
                return size
            elif isinstance(part, h11.ConnectionClosed):
                raise ClientGone

    async def _forward(self, client: ClientConnection, request: ReceivedRequest) -> None:
        """Send a whole request to a worker and relay its answer."""
        try:
            up_reader, up_writer = await asyncio.open_unix_connection(self.settings.upstream)
        except OSError:
            request.body.close()
            raise Refusal("not-ready", "The workers are starting or stopping; retry shortly.") from None
        if self.not_ready:
            log("workers reached", refused_not_ready=self.not_ready)
            self.not_ready = 0
        upstream = h11.Connection(h11.CLIENT)
        headers = list(request.headers)
        if not any(n == b"host" for n, _ in headers):
            headers.append((b"host", b"lagwise"))
        headers += [(b"x-request-id", request.request_id.encode()), (b"connection", b"close")]
        if request.size or request.method not in (b"GET", b"HEAD", b"DELETE", b"OPTIONS"):
            headers.append((b"content-length", str(request.size).encode()))
        try:
            up_writer.write(upstream.send(h11.Request(method=request.method, target=request.target, headers=headers)))
            while block := request.body.read(READ_BLOCK):
                up_writer.write(upstream.send(h11.Data(data=block)))
                await up_writer.drain()
            up_writer.write(upstream.send(h11.EndOfMessage()))
            await up_writer.drain()
            await self._relay(client, request, upstream, up_reader)
        except OSError:
            if client.h11.our_state is h11.SEND_RESPONSE:
                raise Refusal("worker-lost", "The connection to the worker broke before it answered.") from None
            raise ClientGone from None
        finally:
            request.body.close()
            up_writer.close()
            with contextlib.suppress(OSError):
                await up_writer.wait_closed()

    async def _relay(
        self, client: ClientConnection, request: ReceivedRequest, upstream: h11.Connection, reader: asyncio.StreamReader
    ) -> None:
        """Relay the worker's answer; an error answer that is not a problem document is replaced by one."""
        replaced = False
        while True:
            try:
                event = upstream.next_event()
            except h11.RemoteProtocolError:
                event = h11.ConnectionClosed()
            if event is h11.NEED_DATA:
                upstream.receive_data(await reader.read(READ_BLOCK))
                continue
            if isinstance(event, h11.InformationalResponse):
                continue
            if isinstance(event, h11.ConnectionClosed):
                if client.h11.our_state is h11.SEND_RESPONSE:
                    raise Refusal("worker-lost", "The worker stopped before it answered this request.")
                raise ClientGone  # the answer broke off midway: the client sees the connection close
            if isinstance(event, h11.Response):
                media_type = (_header(event.headers, b"content-type") or "").split(";")[0].strip()
                if event.status_code >= 400 and media_type != answers.PROBLEM_MEDIA_TYPE:
                    replaced = True
                    kind = answers.kind_for_status(event.status_code)
                    status, headers, body = answers.problem(
                        kind,
                        f"The server refused the request with status {event.status_code}.",
                        instance=request.path,
                        request_id=request.request_id,
                    )
                    log("replaced an answer", request_id=request.request_id, status=event.status_code, problem=kind)
                    await client.answer(status, headers, b"" if request.method == b"HEAD" else body)
                    continue
                relayed = [(n, v) for n, v in event.headers if n not in HOP_BY_HOP or n == b"content-length"]
                await client.send(h11.Response(status_code=event.status_code, headers=relayed, reason=event.reason))
            elif isinstance(event, h11.Data):
                if not replaced:
                    await client.send(h11.Data(data=event.data))
            elif isinstance(event, h11.EndOfMessage):
                if not replaced:
                    await client.send(h11.EndOfMessage())
                return


def _accept(headers) -> str | None:
    """The request's Accept fields joined into one value (RFC 9110 §5.3), or None without one."""
    values = [value.decode("latin-1") for key, value in headers if key == b"accept"]
    return ", ".join(values) if values else None


def _header(headers, name: bytes) -> str | None:
    for key, value in headers:
        if key == name:
            return value.decode("latin-1")
    return None
