"""Limits and safety checks applied to an uploaded spreadsheet before any parser touches it.

* Size: uploads over ``PANELWRIGHT_MAX_UPLOAD_MB`` (default 10 MB) are refused.
* XLSX is a zip: its central directory is checked first (entry count, total uncompressed
  size, compression ratio of each large entry) so a zip bomb is refused from its headers,
  without extracting anything.  Python's ``zipfile`` never yields more bytes than an entry's
  header declares and checks the CRC, so a header that lies makes the read fail (reported as a
  corrupt file) instead of inflating past these limits.
* Macro-enabled workbooks (``.xlsm``, or any workbook holding ``xl/vbaProject.bin``) are
  refused, not opened with the macros dropped: the user re-saves as ``.xlsx``.
* An XML entity bomb inside a small sheet passes these checks but is stopped by the XML parser
  (expat 2.4 or later caps entity amplification); the reader reports it as an unreadable file.
* Formulas are never evaluated (the reader opens workbooks with ``data_only=False`` and reports
  each formula cell as a problem; see :mod:`server.sheets.reader`).
"""

from __future__ import annotations

import io
import os
import zipfile
from dataclasses import dataclass

from .errors import SheetFileError

DEFAULT_MAX_UPLOAD_MB = 10.0


@dataclass(frozen=True)
class ZipLimits:
    """Bounds on an XLSX zip, checked from its central directory before extraction."""

    max_entries: int = 2_000
    #: Total uncompressed size.  A 10 MB workbook of plain cell XML inflates to roughly
    #: 60-120 MB (spreadsheet XML compresses about 6-12×, common practice); 200 MB leaves room.
    max_uncompressed_bytes: int = 200 * 1024 * 1024
    #: Per-entry ratio, applied to entries over ``ratio_floor_bytes`` (tiny entries compress
    #: at silly ratios legitimately).  Real sheet XML stays well under 100:1; a bomb of zeros
    #: reaches about 1000:1 with deflate.
    max_ratio: float = 100.0
    ratio_floor_bytes: int = 1024 * 1024


def max_upload_bytes() -> int:
    """The upload limit from ``PANELWRIGHT_MAX_UPLOAD_MB`` (megabytes, default 10)."""
    raw = os.environ.get("PANELWRIGHT_MAX_UPLOAD_MB")
    if raw is None or not raw.strip():
        mb = DEFAULT_MAX_UPLOAD_MB
    else:
        try:
            mb = float(raw)
        except ValueError:
            raise SheetFileError(
                f"the setting PANELWRIGHT_MAX_UPLOAD_MB must be a number of megabytes, not {raw!r}"
            ) from None
        if mb <= 0:
            raise SheetFileError("the setting PANELWRIGHT_MAX_UPLOAD_MB must be greater than 0")
    return int(mb * 1024 * 1024)


def _mb(n: int) -> str:
    if n < 1024 * 1024:
        return f"{n / 1024:.0f} kB"
    return f"{n / (1024 * 1024):.1f} MB"


def check_size(size_bytes: int, *, source: str, limit_bytes: int | None = None) -> None:
    """Refuse an upload larger than the limit, naming both sizes."""
    limit = max_upload_bytes() if limit_bytes is None else limit_bytes
    if size_bytes > limit:
        raise SheetFileError(
            f"the file is {_mb(size_bytes)}; uploads are limited to {_mb(limit)} "
            "(setting PANELWRIGHT_MAX_UPLOAD_MB). Split the workbook or remove unused sheets.",
            source=source,
        )
    if size_bytes == 0:
        raise SheetFileError("the file is empty", source=source)


def open_checked_zip(data: bytes, *, source: str, limits: ZipLimits | None = None) -> zipfile.ZipFile:
    """Open ``data`` as a zip after checking its headers against ``limits``; refuse anything unsafe."""
    lim = limits or ZipLimits()
    if not data.startswith(b"PK\x03\x04"):
        if data.startswith(b"\xd0\xcf\x11\xe0"):
            raise SheetFileError(
                "is an old binary Excel file (.xls) or another OLE document; save it as .xlsx or CSV",
                source=source,
            )
        raise SheetFileError(
            "is not an XLSX workbook (an XLSX file is a zip archive); use .xlsx or .csv", source=source
        )
    try:
        zf = zipfile.ZipFile(io.BytesIO(data))
    except (zipfile.BadZipFile, zipfile.LargeZipFile, ValueError, OSError) as exc:
        raise SheetFileError(f"is a damaged or incomplete XLSX/zip file ({exc})", source=source) from None
    infos = zf.infolist()
    if len(infos) > lim.max_entries:
        raise SheetFileError(
            f"the workbook zip holds {len(infos)} entries; at most {lim.max_entries} are accepted", source=source
        )
    total = 0
    for info in infos:
        total += info.file_size
        if info.file_size > lim.ratio_floor_bytes:
            ratio = info.file_size / max(info.compress_size, 1)
            if ratio > lim.max_ratio:
                raise SheetFileError(
                    f"entry {info.filename!r} would inflate {ratio:.0f}:1 ({_mb(info.file_size)} from "
                    f"{_mb(info.compress_size)}); refused as a likely zip bomb",
                    source=source,
                )
    if total > lim.max_uncompressed_bytes:
        raise SheetFileError(
            f"the workbook would inflate to {_mb(total)}; at most {_mb(lim.max_uncompressed_bytes)} is accepted",
            source=source,
        )
    names = {i.filename for i in infos}
    if "xl/vbaProject.bin" in names or any(n.lower().endswith("vbaproject.bin") for n in names):
        raise SheetFileError(
            "is a macro-enabled workbook; macros are refused, never run or kept. Save it as .xlsx (no macros) "
            "and upload again",
            source=source,
        )
    if "xl/workbook.xml" not in names:
        raise SheetFileError("is a zip archive but not an XLSX workbook (no xl/workbook.xml)", source=source)
    return zf
