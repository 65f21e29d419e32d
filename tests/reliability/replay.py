"""Watching a real ``lagwise serve`` while hostile requests are replayed against it.

The worker processes are found through ``/proc`` (the ``lagwise serve`` process, its
gunicorn master, the master's children). Their peak resident memory is read from
``VmHWM`` after resetting it (writing ``5`` to ``/proc/PID/clear_refs``, proc(5)), so
each replay measures its own peak above the idle level, not the worker's lifetime peak.
"""

from __future__ import annotations

import json
import socket
import time
from dataclasses import dataclass, field
from pathlib import Path
from urllib.parse import urlparse


def _children(pid: int) -> list[int]:
    path = Path(f"/proc/{pid}/task/{pid}/children")
    try:
        return [int(p) for p in path.read_text().split()]
    except OSError:
        return []


def _status_kb(pid: int, field_name: str) -> int:
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith(field_name + ":"):
                return int(line.split()[1])
    except OSError:
        pass
    return 0


def instance_pid(port: int) -> int:
    """The ``lagwise serve`` process bound to ``127.0.0.1:port``."""
    for cmdline in Path("/proc").glob("[0-9]*/cmdline"):
        try:
            args = cmdline.read_bytes().split(b"\0")
        except OSError:
            continue
        if b"serve" in args and f"127.0.0.1:{port}".encode() in args:
            return int(cmdline.parent.name)
    raise LookupError(port)


@dataclass
class Answer:
    """One exchange: status, headers (lower-case names), body, wall seconds, worker peak growth (MiB)."""

    status: int
    headers: dict
    body: bytes
    seconds: float
    growth_mib: float = 0.0

    @property
    def document(self) -> dict:
        try:
            return json.loads(self.body)
        except ValueError:
            return {}


@dataclass
class Watch:
    """The workers of one instance: their pids, idle memory, and the worst figures seen."""

    url: str
    worst_seconds: float = 0.0
    worst_growth_mib: float = 0.0
    worst_retained_mib: float = 0.0
    lines: list[str] = field(default_factory=list)

    def __post_init__(self):
        self.port = urlparse(self.url).port
        self.serve = instance_pid(self.port)
        self.idle_kb = {pid: _status_kb(pid, "VmRSS") for pid in self.workers()}

    def workers(self) -> list[int]:
        """Worker pids (children of the gunicorn master, itself a child of ``lagwise serve``)."""
        return sorted(w for master in _children(self.serve) for w in _children(master))

    def reset_peaks(self) -> None:
        """Reset each worker's peak to its present resident memory, which becomes the baseline."""
        self.before_kb = {}
        for pid in self.workers():
            try:
                Path(f"/proc/{pid}/clear_refs").write_text("5")
            except OSError:
                pass
            self.before_kb[pid] = _status_kb(pid, "VmRSS")

    def growth_mib(self) -> float:
        """Largest peak resident memory of a worker since the last reset, above its level then (MiB)."""
        return max(
            ((_status_kb(pid, "VmHWM") - self.before_kb.get(pid, 0)) / 1024 for pid in self.workers()),
            default=0.0,
        )

    def retained_mib(self) -> float:
        """Largest resident memory of a worker now above its idle level (MiB): what requests left behind."""
        return max(
            ((_status_kb(pid, "VmRSS") - self.idle_kb.get(pid, 0)) / 1024 for pid in self.workers()), default=0.0
        )

    def record(self, name: str, answer: Answer) -> None:
        self.worst_seconds = max(self.worst_seconds, answer.seconds)
        self.worst_growth_mib = max(self.worst_growth_mib, answer.growth_mib)
        self.worst_retained_mib = max(self.worst_retained_mib, self.retained_mib())
        self.lines.append(
            f"{name}: {answer.status} in {answer.seconds:.2f} s, worker peak +{answer.growth_mib:.0f} MiB, "
            f"retained +{self.retained_mib():.0f} MiB"
        )

    def summary(self) -> str:
        return (
            f"worst latency {self.worst_seconds:.1f} s, worst worker peak {self.worst_growth_mib:.0f} MiB above "
            f"its level before the request, worst resident memory {self.worst_retained_mib:.0f} MiB above idle"
        )


def exchange(url: str, raw: bytes, timeout: float = 180.0) -> tuple[int, dict, bytes]:
    """Send raw bytes on a fresh connection and read the whole answer (the request must say Connection: close)."""
    parts = urlparse(url)
    with socket.create_connection((parts.hostname, parts.port), timeout=timeout) as s:
        s.sendall(raw)
        data = b""
        while chunk := s.recv(1 << 20):
            data += chunk
    head, _, body = data.partition(b"\r\n\r\n")
    lines = head.decode("latin-1").split("\r\n")
    headers = {k.strip().lower(): v.strip() for k, _, v in (line.partition(":") for line in lines[1:])}
    if headers.get("transfer-encoding") == "chunked":
        body = _dechunk(body)
    return int(lines[0].split()[1]), headers, body


def _dechunk(data: bytes) -> bytes:
    out = b""
    while data:
        size_line, _, data = data.partition(b"\r\n")
        size = int(size_line.split(b";")[0], 16)
        if size == 0:
            break
        out += data[:size]
        data = data[size + 2 :]
    return out


def post_bytes(path: str, body: bytes, headers: dict | None = None) -> bytes:
    """A whole POST request with a JSON body."""
    lines = [f"POST {path} HTTP/1.1", "Host: replay", "Content-Type: application/json", "Connection: close"]
    lines += [f"{k}: {v}" for k, v in (headers or {}).items()]
    if "Transfer-Encoding" not in (headers or {}):
        lines.append(f"Content-Length: {len(body)}")
    return ("\r\n".join(lines) + "\r\n\r\n").encode() + body


def replay(watch: Watch, raw: bytes, timeout: float = 180.0) -> Answer:
    """Replay one request, timing it and measuring the workers' peak memory growth."""
    watch.reset_peaks()
    start = time.perf_counter()
    status, headers, body = exchange(watch.url, raw, timeout)
    seconds = time.perf_counter() - start
    return Answer(status, headers, body, seconds, watch.growth_mib())


def healthz_seconds(url: str) -> float:
    """Wall seconds of one ``GET /healthz`` (which must answer 200)."""
    start = time.perf_counter()
    status, _, _ = exchange(url, b"GET /healthz HTTP/1.1\r\nHost: replay\r\nConnection: close\r\n\r\n", 30.0)
    assert status == 200
    return time.perf_counter() - start
