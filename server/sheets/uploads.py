"""Holding an uploaded spreadsheet between the mapping step and the confirmation.

The browser import is three requests (upload, correct the mapping while the preview updates,
confirm), so the uploaded bytes wait in a private temporary folder under a random token,
bound to the project they were uploaded for.  Files older than :data:`MAX_AGE_S` are removed
on each new upload; a confirmed or discarded import removes its file at once.  Nothing here
touches the project: only the confirmation writes, through :mod:`server.sheets.store`.
"""

from __future__ import annotations

import json
import os
import re
import secrets
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path, PurePath

MAX_AGE_S = 6 * 3600
_TOKEN_RE = re.compile(r"[A-Za-z0-9_-]{20,64}")


@dataclass(frozen=True)
class HeldUpload:
    token: str
    project_id: int
    filename: str
    data: bytes


class UploadStore:
    """Uploaded files by token in one folder (default: ``<tmp>/panelwright-uploads``)."""

    def __init__(self, folder: Path | None = None) -> None:
        self.folder = folder or Path(tempfile.gettempdir()) / "panelwright-uploads"

    def _paths(self, token: str) -> tuple[Path, Path]:
        return self.folder / f"{token}.bin", self.folder / f"{token}.json"

    def save(self, project_id: int, filename: str, data: bytes) -> str:
        self.folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        self.prune()
        token = secrets.token_urlsafe(24)
        body, meta = self._paths(token)
        body.write_bytes(data)
        meta.write_text(json.dumps({"project_id": project_id, "filename": PurePath(filename).name}), encoding="utf-8")
        return token

    def load(self, token: str, project_id: int) -> HeldUpload | None:
        """The held upload, or None if the token is unknown, expired or for another project."""
        if not _TOKEN_RE.fullmatch(token):
            return None
        body, meta = self._paths(token)
        try:
            info = json.loads(meta.read_text(encoding="utf-8"))
            data = body.read_bytes()
        except (OSError, ValueError):
            return None
        if info.get("project_id") != project_id:
            return None
        return HeldUpload(token, project_id, str(info.get("filename") or "upload"), data)

    def discard(self, token: str) -> None:
        if not _TOKEN_RE.fullmatch(token):
            return
        for path in self._paths(token):
            try:
                path.unlink()
            except FileNotFoundError:
                pass

    def prune(self, now: float | None = None) -> None:
        now = time.time() if now is None else now
        try:
            entries = list(os.scandir(self.folder))
        except FileNotFoundError:
            return
        for entry in entries:
            try:
                if now - entry.stat().st_mtime > MAX_AGE_S:
                    os.unlink(entry.path)
            except OSError:
                continue
