"""Holding uploads between the mapping step and the confirmation."""

from __future__ import annotations

import os
import time

from server.sheets.uploads import MAX_AGE_S, UploadStore


def test_save_load_discard(tmp_path):
    store = UploadStore(tmp_path / "u")
    token = store.save(7, "../../etc/Schedule.xlsx", b"data")
    held = store.load(token, 7)
    assert held is not None and held.data == b"data" and held.filename == "Schedule.xlsx"
    assert store.load(token, 8) is None  # bound to its project
    assert store.load("../../etc/passwd", 7) is None  # not a token
    store.discard(token)
    assert store.load(token, 7) is None


def test_old_uploads_are_pruned(tmp_path):
    store = UploadStore(tmp_path / "u")
    old = store.save(1, "a.csv", b"a")
    past = time.time() - MAX_AGE_S - 10
    for path in (tmp_path / "u").iterdir():
        os.utime(path, (past, past))
    fresh = store.save(1, "b.csv", b"b")  # saving prunes
    assert store.load(old, 1) is None and store.load(fresh, 1) is not None
