"""Bad files get clear refusals before any parser touches them: size, zip bombs, macros, corrupt files."""

from __future__ import annotations

import io
import zipfile

import pytest

from server.sheets.errors import SheetFileError
from server.sheets.limits import ZipLimits, max_upload_bytes, open_checked_zip
from server.sheets.reader import read_upload

from .conftest import messy_xlsx


def zip_bomb(inflated_mb: int = 200) -> bytes:
    """A small zip whose worksheet entry inflates to ``inflated_mb`` MB of zeros (streamed, never held)."""
    buf = io.BytesIO()
    chunk = b"\0" * (1024 * 1024)
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("[Content_Types].xml", "<Types/>")
        zf.writestr("xl/workbook.xml", "<workbook/>")
        with zf.open("xl/worksheets/sheet1.xml", "w", force_zip64=True) as entry:
            for _ in range(inflated_mb):
                entry.write(chunk)
    return buf.getvalue()


def test_zip_bomb_is_refused_from_its_headers():
    bomb = zip_bomb(200)
    assert len(bomb) < 1024 * 1024  # small on the wire
    with pytest.raises(SheetFileError) as exc:
        read_upload(bomb, "bomb.xlsx")
    assert "zip bomb" in exc.value.describe() and "bomb.xlsx" in exc.value.describe()
    assert "sheet1.xml" in exc.value.describe()
    # refused from the central directory, so the ratio it reports is the header's: about 1000:1
    assert "200.0 MB" in exc.value.describe()


def test_total_size_and_entry_count_limits():
    data = messy_xlsx()
    with pytest.raises(SheetFileError, match="would inflate to"):
        open_checked_zip(data, source="m.xlsx", limits=ZipLimits(max_uncompressed_bytes=1000))
    with pytest.raises(SheetFileError, match="entries; at most 3"):
        open_checked_zip(data, source="m.xlsx", limits=ZipLimits(max_entries=3))


def test_not_a_spreadsheet():
    with pytest.raises(SheetFileError, match="is not an XLSX workbook"):
        read_upload(b"hello, I am plain text", "notes.xlsx")
    with pytest.raises(SheetFileError, match="is not a spreadsheet"):
        read_upload(b"%PDF-1.7", "drawing.pdf")
    with pytest.raises(SheetFileError, match=r"old binary Excel file \(\.xls\)"):
        read_upload(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\0" * 100, "old.xlsx")
    with pytest.raises(SheetFileError, match="not a text CSV"):
        read_upload(b"a,b\n\0\0\0", "x.csv")


def test_corrupt_workbook():
    data = messy_xlsx()
    with pytest.raises(SheetFileError, match="damaged"):
        read_upload(data[: len(data) // 2], "half.xlsx")
    # a zip that is not a workbook
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        zf.writestr("readme.txt", "hi")
    with pytest.raises(SheetFileError, match="not an XLSX workbook"):
        read_upload(buf.getvalue(), "z.xlsx")


def test_corrupt_entry_inside_a_valid_zip_is_a_message_not_a_traceback():
    buf = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(messy_xlsx())) as src, zipfile.ZipFile(buf, "w") as dst:
        for info in src.infolist():
            body = src.read(info)
            if info.filename == "xl/worksheets/sheet1.xml":
                body = body[: len(body) // 2]  # broken XML
            dst.writestr(info, body)
    with pytest.raises(SheetFileError, match="broken.xlsx"):
        read_upload(buf.getvalue(), "broken.xlsx")


def test_macro_workbooks_are_refused():
    with pytest.raises(SheetFileError, match="macro-enabled"):
        read_upload(messy_xlsx(), "schedule.xlsm")
    buf = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(messy_xlsx())) as src, zipfile.ZipFile(buf, "w") as dst:
        for info in src.infolist():
            dst.writestr(info, src.read(info))
        dst.writestr("xl/vbaProject.bin", b"\0" * 64)
    with pytest.raises(SheetFileError, match="macros are refused"):
        read_upload(buf.getvalue(), "renamed.xlsx")


def test_upload_size_limit_from_the_setting(monkeypatch):
    monkeypatch.setenv("PANELWRIGHT_MAX_UPLOAD_MB", "0.001")  # about 1 kB
    assert max_upload_bytes() == int(0.001 * 1024 * 1024)
    with pytest.raises(SheetFileError, match=r"uploads are limited to 1 kB \(setting PANELWRIGHT_MAX_UPLOAD_MB\)"):
        read_upload(messy_xlsx(), "big.xlsx")
    monkeypatch.setenv("PANELWRIGHT_MAX_UPLOAD_MB", "ten")
    with pytest.raises(SheetFileError, match="must be a number of megabytes"):
        max_upload_bytes()
    monkeypatch.delenv("PANELWRIGHT_MAX_UPLOAD_MB")
    assert max_upload_bytes() == 10 * 1024 * 1024


def test_empty_file():
    with pytest.raises(SheetFileError, match="the file is empty"):
        read_upload(b"", "e.csv")


def test_xml_entity_bomb_inside_a_small_workbook_is_refused():
    """A "billion laughs" sheet is tiny when zipped, so the zip checks pass; the XML parser
    (expat 2.4 or later limits entity amplification) stops it and the user gets a message."""
    bomb = (
        '<?xml version="1.0"?><!DOCTYPE lolz [<!ENTITY lol "lol">'
        + "".join(f'<!ENTITY lol{i} "{("&lol%s;" % ("" if i == 1 else i - 1)) * 10}">' for i in range(1, 10))
        + ']><worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>'
        '<row r="1"><c r="A1" t="inlineStr"><is><t>&lol9;</t></is></c></row></sheetData></worksheet>'
    )
    buf = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(messy_xlsx())) as src, zipfile.ZipFile(buf, "w") as dst:
        for info in src.infolist():
            body = src.read(info)
            dst.writestr(info, bomb.encode() if info.filename == "xl/worksheets/sheet1.xml" else body)
    with pytest.raises(SheetFileError, match=r"laughs\.xlsx: cannot be read as an XLSX workbook"):
        read_upload(buf.getvalue(), "laughs.xlsx")
