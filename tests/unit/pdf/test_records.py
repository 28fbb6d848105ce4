"""Records of finished PDF sets (server/pdf/records.py) and the job registry reading them back
(server/pdf/jobs.py): round trip, refusal of malformed or misplaced records, per-project retention.
No rendering here: the PDFs are small stand-in byte strings (the web tests render real sets)."""

from __future__ import annotations

import json
import logging
import uuid
from dataclasses import replace
from pathlib import Path

import pytest

from server.pdf.jobs import JobRegistry
from server.pdf.records import (
    RecordError,
    SetRecord,
    is_job_id,
    read_record,
    record_path,
    sha256_hex,
    write_atomic,
    write_record,
)


def _set(directory: Path, *, project_id: int = 1, finished_at: str = "2026-01-02T03:04:05.000000Z") -> SetRecord:
    """A PDF file and its record in ``directory``."""
    job_id = uuid.uuid4().hex
    data = b"%PDF-1.7 stand-in " + job_id.encode()
    write_atomic(directory / f"{job_id}.pdf", data)
    rec = SetRecord(
        job_id=job_id,
        project_id=project_id,
        project_number="24-017",
        sheets=("LP-1",),
        revision="revision 2",
        started_by="engineer",
        started_at="2026-01-02T03:04:00.000000Z",
        finished_at=finished_at,
        pages=1,
        sheet_count=1,
        rendered=1,
        from_cache=0,
        file=f"{job_id}.pdf",
        download_name="24-017-LP-1.pdf",
        size_bytes=len(data),
        sha256=sha256_hex(data),
    )
    write_record(directory, rec)
    return rec


def test_round_trip(tmp_path: Path) -> None:
    rec = _set(tmp_path)
    assert read_record(record_path(tmp_path, rec.job_id), tmp_path) == rec
    whole = replace(rec, sheets=None)
    write_record(tmp_path, whole)
    back = read_record(record_path(tmp_path, rec.job_id), tmp_path)
    assert back.sheets is None and back == whole
    assert json.loads(record_path(tmp_path, rec.job_id).read_text())["sheets"] is None
    assert not list(tmp_path.glob(".tmp-*"))  # atomic writes leave no temporary files


def test_job_ids_are_32_hex_digits() -> None:
    assert is_job_id(uuid.uuid4().hex)
    for bad in ["", "../x", "0123abcd", "A" * 32, "g" * 32, "a" * 31 + "/", uuid.uuid4().hex + ".pdf"]:
        assert not is_job_id(bad)
    with pytest.raises(RecordError):
        record_path(Path("."), "../../etc/passwd")


def _rewrite(tmp_path: Path, rec: SetRecord, **changes) -> Path:
    path = record_path(tmp_path, rec.job_id)
    data = json.loads(path.read_text())
    data.update(changes)
    path.write_text(json.dumps(data))
    return path


@pytest.mark.parametrize(
    "changes, message",
    [
        ({"file": "../outside.pdf"}, "inside"),
        ({"file": "/etc/passwd"}, "inside"),
        ({"job_id": "../../x"}, "does not match"),
        ({"format": "something-else"}, "not a panelwright-pdf-set-1 record"),
        ({"size_bytes": 1}, "the record says 1"),
        ({"project_id": "1"}, "project_id"),
        ({"download_name": "../x.pdf"}, "plain file name"),
        ({"sheets": "LP-1"}, "sheets"),
    ],
)
def test_malformed_records_are_refused(tmp_path: Path, changes: dict, message: str) -> None:
    rec = _set(tmp_path)
    path = _rewrite(tmp_path, rec, **changes)
    with pytest.raises(RecordError, match=message.replace("(", r"\(")):
        read_record(path, tmp_path)


def test_a_changed_pdf_is_refused(tmp_path: Path) -> None:
    rec = _set(tmp_path)
    data = (tmp_path / rec.file).read_bytes()
    (tmp_path / rec.file).write_bytes(data[:-1] + b"X")  # same size, other content
    with pytest.raises(RecordError, match="SHA-256"):
        read_record(record_path(tmp_path, rec.job_id), tmp_path)
    assert read_record(record_path(tmp_path, rec.job_id), tmp_path, check_hash=False).job_id == rec.job_id


def test_unreadable_record_and_missing_pdf_are_refused(tmp_path: Path) -> None:
    rec = _set(tmp_path)
    path = record_path(tmp_path, rec.job_id)
    path.write_bytes(b"{not json")
    with pytest.raises(RecordError, match="unreadable"):
        read_record(path, tmp_path)
    other = _set(tmp_path)
    (tmp_path / other.file).unlink()
    with pytest.raises(RecordError, match="missing"):
        read_record(record_path(tmp_path, other.job_id), tmp_path)


def test_registry_reads_good_records_and_logs_bad_ones(tmp_path: Path, caplog: pytest.LogCaptureFixture) -> None:
    good = _set(tmp_path)
    bad = _set(tmp_path)
    record_path(tmp_path, bad.job_id).write_text("[]")
    with caplog.at_level(logging.WARNING, logger="panelwright.pdf"):
        reg = JobRegistry(tmp_path, tmp_path / "cache")
    try:
        job = reg.get(good.job_id)
        assert job is not None and job.state == "done" and job.path == tmp_path / good.file
        assert (job.filename, job.started_by, job.revision, job.pages) == (
            "24-017-LP-1.pdf",
            "engineer",
            "revision 2",
            1,
        )
        assert job.record() == good  # what was written is what comes back
        assert reg.get(bad.job_id) is None
        assert reg.get("../" + good.job_id) is None
        assert any(bad.job_id in r.getMessage() for r in caplog.records)
    finally:
        reg.shutdown()


def test_retention_keeps_the_newest_per_project(tmp_path: Path) -> None:
    mine = [_set(tmp_path, project_id=1, finished_at=f"2026-01-0{d}T00:00:00.000000Z") for d in range(1, 6)]
    other = [_set(tmp_path, project_id=2, finished_at=f"2026-01-0{d}T00:00:00.000000Z") for d in range(1, 3)]
    reg = JobRegistry(tmp_path, tmp_path / "cache", keep=2)
    try:
        assert [j.id for j in reg.finished_sets(1)] == [mine[4].job_id, mine[3].job_id]  # newest first
        assert {j.id for j in reg.finished_sets(2)} == {r.job_id for r in other}  # another project untouched
        for rec in mine[:3]:
            assert not (tmp_path / rec.file).exists() and not record_path(tmp_path, rec.job_id).exists()
        for rec in mine[3:] + other:
            assert (tmp_path / rec.file).exists() and record_path(tmp_path, rec.job_id).exists()
    finally:
        reg.shutdown()


def test_retention_leaves_other_files_alone(tmp_path: Path) -> None:
    """Only sets with a record are counted and deleted: a stray file in the folder stays."""
    stray = tmp_path / "issued-by-hand.pdf"
    stray.write_bytes(b"%PDF keep me")
    for d in range(1, 4):
        _set(tmp_path, finished_at=f"2026-01-0{d}T00:00:00.000000Z")
    JobRegistry(tmp_path, tmp_path / "cache", keep=1).shutdown()
    assert stray.read_bytes() == b"%PDF keep me"
    assert len(list(tmp_path.glob("*.json"))) == 1


def test_temporary_and_foreign_json_files_are_ignored(tmp_path: Path, caplog: pytest.LogCaptureFixture) -> None:
    good = _set(tmp_path)
    (tmp_path / ".tmp-abc.json").write_text("{half a rec")  # an interrupted atomic write
    (tmp_path / "notes.json").write_text("{}")
    with caplog.at_level(logging.WARNING, logger="panelwright.pdf"):
        reg = JobRegistry(tmp_path, tmp_path / "cache")
    try:
        assert [j.id for j in reg.finished_sets(1)] == [good.job_id]
        assert not [r for r in caplog.records if r.levelno >= logging.WARNING]  # nothing to warn about
        assert (tmp_path / "notes.json").exists()  # not ours: left alone
    finally:
        reg.shutdown()
