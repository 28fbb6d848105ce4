"""A real server for the team tests and the team benchmark: uvicorn in a subprocess on 127.0.0.1.

:class:`LiveServer` starts ``uvicorn --factory server.web.app:create_app`` with the database URL
in the environment, waits until it answers, and stops (or SIGKILLs) it.  :class:`TeamUser` is
one signed-in browser over httpx: it keeps the session cookie and CSRF token, and edits
circuits the way the grid's htmx does, sending the row version it last saw.
"""

from __future__ import annotations

import os
import re
import signal
import socket
import subprocess
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import httpx

ROOT = Path(__file__).resolve().parents[3]
PASSWORD = "correct-horse-battery"
START_TIMEOUT_S = 120.0  # a loaded CI machine imports slowly; bounded all the same


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class LiveServer:
    def __init__(self, database_url: str, *, bench_endpoints: bool = False, log: Path | None = None) -> None:
        self.database_url = database_url
        self.port = free_port()
        self.base = f"http://127.0.0.1:{self.port}"
        self.bench_endpoints = bench_endpoints
        self.log = log
        self.proc: subprocess.Popen | None = None

    def start(self) -> LiveServer:
        env = {
            **os.environ,
            "PANELWRIGHT_DATABASE_URL": self.database_url,
            "PANELWRIGHT_BENCH_ENDPOINTS": "1" if self.bench_endpoints else "0",
            "PANELWRIGHT_SINGLE_USER": "0",
            "PANELWRIGHT_LOGIN_MAX_FAILURES": "50",
        }
        out = open(self.log, "ab") if self.log else subprocess.DEVNULL  # noqa: SIM115 - closed with the process
        self.proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "uvicorn",
                "--factory",
                "server.web.app:create_app",
                "--host",
                "127.0.0.1",
                "--port",
                str(self.port),
                "--log-level",
                "warning",
            ],
            cwd=ROOT,
            env=env,
            stdout=out,
            stderr=out,
        )
        deadline = time.monotonic() + START_TIMEOUT_S
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"the server exited with {self.proc.returncode} before answering")
            try:
                if httpx.get(self.base + "/login", timeout=2).status_code == 200:
                    return self
            except httpx.HTTPError:
                pass
            time.sleep(0.1)
        self.stop()
        raise RuntimeError(f"the server did not answer within {START_TIMEOUT_S:.0f} s")

    def kill(self) -> None:
        """SIGKILL: no shutdown, no flush, as in a crash."""
        if self.proc and self.proc.poll() is None:
            self.proc.send_signal(signal.SIGKILL)
            self.proc.wait(timeout=10)

    def stop(self) -> None:
        if self.proc and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.kill()

    def __enter__(self) -> LiveServer:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()


def add_users(database_url: str, names: list[str], role: str = "engineer") -> None:
    from server.auth.accounts import add_user
    from server.config import Settings
    from server.db.session import make_engine, make_sessionmaker

    engine = make_engine(Settings(database_url=database_url))
    sessions = make_sessionmaker(engine)
    for n in names:
        add_user(sessions, name=n, role=role, password=PASSWORD)
    engine.dispose()


VERSION_RE = re.compile(r'id="s(\d+)-version" value="(\d+)"')


@dataclass
class TeamUser:
    """One signed-in browser."""

    base: str
    name: str
    client: httpx.Client = field(init=False)
    versions: dict[tuple[str, int], int] = field(default_factory=dict)

    def __post_init__(self) -> None:
        self.client = httpx.Client(base_url=self.base, timeout=30)

    def sign_in(self) -> None:
        page = self.client.get("/login")
        token = re.search(r'name="csrf_token" value="([0-9a-f]+)"', page.text).group(1)
        r = self.client.post("/login", data={"name": self.name, "password": PASSWORD, "csrf_token": token})
        if r.status_code != 303:
            raise RuntimeError(f"sign-in of {self.name} failed: {r.status_code} {r.text[:200]}")
        home = self.client.get("/")
        self.client.headers["X-CSRF-Token"] = re.search(
            r'<meta name="csrf-token" content="([0-9a-f]+)"', home.text
        ).group(1)

    def open_panel(self, pid: int, tag: str) -> httpx.Response:
        r = self.client.get(f"/projects/{pid}/panels/{tag}")
        for slot, version in VERSION_RE.findall(r.text):
            self.versions[(tag, int(slot))] = int(version)
        return r

    def edit(self, pid: int, tag: str, slot: int, field_name: str, value: str) -> httpx.Response:
        data = {field_name: value}
        version = self.versions.get((tag, slot))
        if version is not None:
            data["version"] = str(version)
        r = self.client.post(
            f"/projects/{pid}/panels/{tag}/circuits/{slot}",
            data=data,
            headers={"HX-Request": "true", "HX-Trigger-Name": field_name},
        )
        for s, v in VERSION_RE.findall(r.text):
            self.versions[(tag, int(s))] = int(v)
        return r

    def close(self) -> None:
        self.client.close()
