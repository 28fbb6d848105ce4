"""Failed-login limits per user name and per client address (in memory, one server process).

A sliding window: after ``max_failures`` failures within ``window_s`` seconds, further
attempts for that name (or from that address, which gets four times the allowance so a shared
office NAT is not locked out by one person) are refused until the oldest failure leaves the
window.  A success clears the name's count.  The table lives in the process: with several
worker processes each keeps its own (documented in docs/lan.md).
"""

from __future__ import annotations

import threading
import time
from collections import deque
from collections.abc import Callable

ADDRESS_FACTOR = 4


class LoginLimiter:
    def __init__(self, max_failures: int, window_s: float, clock: Callable[[], float] = time.monotonic) -> None:
        self.max_failures = max_failures
        self.window_s = window_s
        self._clock = clock
        self._fails: dict[str, deque[float]] = {}
        self._lock = threading.Lock()

    def _recent(self, key: str, now: float) -> deque[float]:
        q = self._fails.setdefault(key, deque())
        while q and now - q[0] > self.window_s:
            q.popleft()
        return q

    def retry_after(self, name: str, address: str) -> float:
        """Seconds until an attempt for ``name`` from ``address`` is allowed (0: allowed now)."""
        now = self._clock()
        with self._lock:
            waits = []
            for key, limit in (
                (f"u:{name.lower()}", self.max_failures),
                (f"a:{address}", self.max_failures * ADDRESS_FACTOR),
            ):
                q = self._recent(key, now)
                if len(q) >= limit:
                    waits.append(self.window_s - (now - q[0]))
            return max(waits, default=0.0)

    def failed(self, name: str, address: str) -> None:
        now = self._clock()
        with self._lock:
            self._recent(f"u:{name.lower()}", now).append(now)
            self._recent(f"a:{address}", now).append(now)

    def succeeded(self, name: str) -> None:
        with self._lock:
            self._fails.pop(f"u:{name.lower()}", None)
