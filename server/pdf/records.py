"""The record of a finished PDF set: a small JSON file beside the set's PDF in ``<pdf cache>/sets``.

A background job (:mod:`server.pdf.jobs`) writes ``<job id>.pdf`` and then ``<job id>.json``
(each atomically: a temporary file renamed into place), so a record exists only for a
complete PDF.  After a restart the job registry reads the records back and lists the sets
again.  Reading is strict: a record whose id, file name, size or SHA-256 does not match, or whose PDF
lies outside the sets folder, raises :class:`RecordError` and the caller skips it.

Record format (``format`` ``panelwright-pdf-set-1``)::

    {"format": "panelwright-pdf-set-1", "job_id": "<32 hex digits>", "project_id": 3,
     "project_number": "24-017", "sheets": null | ["LP-1"], "revision": "revision 2" | "draft",
     "started_by": "engineer", "started_at": "2026-…Z", "finished_at": "2026-…Z",
     "pages": 14, "sheet_count": 14, "rendered": 2, "from_cache": 12,
     "file": "<job id>.pdf", "download_name": "24-017-set.pdf", "size_bytes": 81234,
     "sha256": "<hex>"}
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import tempfile
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

FORMAT = "panelwright-pdf-set-1"
#: Job ids are uuid4 hex strings; anything else in a URL or a record is refused.
JOB_ID_RE = re.compile(r"[0-9a-f]{32}")
#: What the download may be called (the route builds it from the project number and sheet).
DOWNLOAD_NAME_RE = re.compile(r"[A-Za-z0-9._-]{1,200}\.pdf")


class RecordError(ValueError):
    """A set record that cannot be used (unreadable, malformed, or pointing elsewhere)."""


@dataclass(frozen=True)
class SetRecord:
    job_id: str
    project_id: int
    project_number: str
    sheets: tuple[str, ...] | None  # None: the whole set
    revision: str  # "revision N" or "draft"
    started_by: str
    started_at: str  # ISO 8601, UTC
    finished_at: str
    pages: int
    sheet_count: int
    rendered: int
    from_cache: int
    file: str  # the PDF's name inside the sets folder: "<job_id>.pdf"
    download_name: str
    size_bytes: int
    sha256: str

    def to_json(self) -> dict[str, Any]:
        data = asdict(self)
        data["sheets"] = list(self.sheets) if self.sheets is not None else None
        return {"format": FORMAT, **data}


def is_job_id(value: str) -> bool:
    return bool(JOB_ID_RE.fullmatch(value))


def record_path(directory: Path, job_id: str) -> Path:
    if not is_job_id(job_id):
        raise RecordError(f"not a job id: {job_id!r}")
    return directory / f"{job_id}.json"


def pdf_path(directory: Path, job_id: str) -> Path:
    if not is_job_id(job_id):
        raise RecordError(f"not a job id: {job_id!r}")
    return directory / f"{job_id}.pdf"


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def write_atomic(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder (never half a file)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=path.suffix, dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_record(directory: Path, record: SetRecord) -> Path:
    path = record_path(directory, record.job_id)
    write_atomic(path, json.dumps(record.to_json(), indent=1, sort_keys=True).encode("utf-8"))
    return path


def _field(data: dict[str, Any], name: str, kind: type | tuple[type, ...]) -> Any:
    value = data.get(name)
    if not isinstance(value, kind) or isinstance(value, bool):
        raise RecordError(f"field {name!r} is missing or not {getattr(kind, '__name__', kind)}")
    return value


def read_record(path: Path, directory: Path, *, check_hash: bool = True) -> SetRecord:
    """The record at ``path``, checked against the sets folder ``directory`` and its PDF (its size
    and, with ``check_hash``, its SHA-256: a PDF changed on disk is not offered as the set)."""
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise RecordError(f"unreadable ({type(exc).__name__}: {exc})") from None
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise RecordError(f"not a {FORMAT} record")
    job_id = _field(data, "job_id", str)
    if not is_job_id(job_id) or path.name != f"{job_id}.json":
        raise RecordError(f"job id {job_id!r} does not match the record's file name {path.name}")
    file = _field(data, "file", str)
    base = directory.resolve()
    target = (directory / file).resolve()
    if target.parent != base or target.name != f"{job_id}.pdf":
        raise RecordError(f"its PDF {file!r} is not {job_id}.pdf inside {base}")
    sheets = data.get("sheets")
    if sheets is not None and not (isinstance(sheets, list) and all(isinstance(s, str) for s in sheets)):
        raise RecordError("field 'sheets' is neither null nor a list of sheet names")
    download_name = _field(data, "download_name", str)
    if not DOWNLOAD_NAME_RE.fullmatch(download_name):
        raise RecordError(f"download name {download_name!r} is not a plain file name")
    size_bytes = _field(data, "size_bytes", int)
    try:
        actual = target.stat().st_size
    except OSError:
        raise RecordError(f"its PDF {target.name} is missing") from None
    if actual != size_bytes:
        raise RecordError(f"its PDF {target.name} has {actual} bytes, the record says {size_bytes}")
    sha256 = _field(data, "sha256", str)
    if check_hash:
        try:
            digest = sha256_hex(target.read_bytes())
        except OSError as exc:
            raise RecordError(f"its PDF {target.name} cannot be read ({exc})") from None
        if digest != sha256:
            raise RecordError(f"its PDF {target.name} does not match the record's SHA-256")
    return SetRecord(
        job_id=job_id,
        project_id=_field(data, "project_id", int),
        project_number=_field(data, "project_number", str),
        sheets=tuple(sheets) if sheets is not None else None,
        revision=_field(data, "revision", str),
        started_by=_field(data, "started_by", str),
        started_at=_field(data, "started_at", str),
        finished_at=_field(data, "finished_at", str),
        pages=_field(data, "pages", int),
        sheet_count=_field(data, "sheet_count", int),
        rendered=_field(data, "rendered", int),
        from_cache=_field(data, "from_cache", int),
        file=file,
        download_name=download_name,
        size_bytes=size_bytes,
        sha256=sha256,
    )
