"""Shared test helpers: tolerance-aware assertions, the demo project path, a server in a thread."""

from __future__ import annotations

import math
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent
DEMO_FILE = ROOT / "seed_demo" / "demo_project.json"


def assert_close(actual: float, expected: float, *, rel: float = 1e-3, abs_: float = 1e-9, what: str = "") -> None:
    """Assert ``actual`` is within ``rel`` (relative) or ``abs_`` (absolute) of ``expected``."""
    if not math.isclose(actual, expected, rel_tol=rel, abs_tol=abs_):
        label = f"{what}: " if what else ""
        raise AssertionError(f"{label}{actual!r} is not within {rel:.2%} of {expected!r}")


@contextmanager
def thread_server(app: Any, *, start_timeout_s: float = 15.0) -> Iterator[str]:
    """Serve ``app`` with uvicorn on 127.0.0.1 (a free port) in a thread; yields its base URL and
    stops it on the way out (browser tests and the web benchmark)."""
    import socket
    import threading
    import time

    import uvicorn

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server = uvicorn.Server(uvicorn.Config(app, host="127.0.0.1", port=port, log_level="warning"))
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    deadline = time.monotonic() + start_timeout_s
    while not server.started:
        if time.monotonic() > deadline or not thread.is_alive():
            server.should_exit = True
            raise RuntimeError(f"the test server did not start within {start_timeout_s:g} s")
        time.sleep(0.05)
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        server.should_exit = True
        thread.join(timeout=10)
