"""Slow clients through nginx do not starve the workers: nginx buffers whole request bodies."""

from __future__ import annotations

import os
import socket
import sys
import threading
import time
from pathlib import Path

import pytest
from lagwise_client import Lagwise

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "deploy"))

from cluster import Cluster  # noqa: E402

pytestmark = pytest.mark.skipif(
    not any(os.path.exists(p) for p in ("/usr/sbin/nginx", "/usr/bin/nginx")), reason="needs Debian's nginx"
)


def test_slow_uploads_do_not_block_fast_clients():
    with Cluster(instances=1, workers=2) as cluster:
        port = int(cluster.url.rsplit(":", 1)[1])
        stop = threading.Event()
        sockets = []

        def trickle():
            s = socket.create_connection(("127.0.0.1", port), timeout=30)
            sockets.append(s)
            s.sendall(
                b"POST /v1/experimental-variograms HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: 100000\r\n\r\n"
            )
            while not stop.wait(0.2):
                try:
                    s.sendall(b" ")
                except OSError:
                    return

        trickling = [threading.Thread(target=trickle) for _ in range(12)]
        for t in trickling:
            t.start()
        time.sleep(1.0)
        latencies = []
        with Lagwise(cluster.url, retries=0, timeout=10) as lw:
            for _ in range(20):
                start = time.perf_counter()
                lw.experimental_variogram(
                    x=[0, 1, 2, 3, 4], values=[1, 2, 1, 3, 2], lags={"width": 1, "count": 3}, min_pairs=1
                )
                latencies.append(time.perf_counter() - start)
        stop.set()
        for t in trickling:
            t.join()
        for s in sockets:
            s.close()
    # 12 slow uploads hold no gunicorn worker: the fast requests are answered at once.
    assert max(latencies) < 1.0, latencies
