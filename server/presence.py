"""Who has a panel open: an in-memory table with expiry (one server process).

Each panel page polls ``…/presence`` about every 10 s; a poll marks the viewer as present for
:data:`TTL_S` seconds and answers with everyone else present.  The table lives in the server
process: with several worker processes each would see only its own viewers, which is why
docs/lan.md says to run one process (SQLite) or to accept partial presence (PostgreSQL with
several workers).
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable

TTL_S = 30.0


class Presence:
    def __init__(self, ttl_s: float = TTL_S, clock: Callable[[], float] = time.monotonic) -> None:
        self.ttl_s = ttl_s
        self._clock = clock
        self._seen: dict[str, dict[str, float]] = {}
        self._lock = threading.Lock()

    def touch(self, place: str, user: str) -> list[str]:
        """Mark ``user`` at ``place``; the other users there now, sorted."""
        now = self._clock()
        with self._lock:
            here = self._seen.setdefault(place, {})
            here[user] = now
            for name in [n for n, t in here.items() if now - t > self.ttl_s]:
                del here[name]
            return sorted(n for n in here if n != user)

    def leave(self, place: str, user: str) -> None:
        with self._lock:
            self._seen.get(place, {}).pop(user, None)
