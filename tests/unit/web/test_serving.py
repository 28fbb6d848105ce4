"""server.web.serving: the garbage-collector preparation `panelwright serve` makes before its first request."""

from __future__ import annotations

import gc

import pytest

from server.config import Settings
from server.web.serving import prepare_process


@pytest.fixture
def restore_gc():
    before = gc.get_threshold()
    yield
    gc.unfreeze()
    gc.set_threshold(*before)


def test_prepare_freezes_startup_objects_and_raises_the_young_threshold(restore_gc) -> None:
    gc.set_threshold(700, 10, 10)
    thresholds = prepare_process(Settings(gc_young_threshold=12_345))
    assert thresholds == (12_345, 10, 10) == gc.get_threshold()
    assert gc.get_freeze_count() > 0  # what was alive at start-up is out of the collector's way


def test_zero_keeps_pythons_threshold(restore_gc) -> None:
    gc.set_threshold(700, 10, 10)
    assert prepare_process(Settings(gc_young_threshold=0)) == (700, 10, 10)


def test_the_setting_is_read_from_the_environment(monkeypatch) -> None:
    monkeypatch.setenv("PANELWRIGHT_GC_YOUNG_THRESHOLD", "5000")
    assert Settings().gc_young_threshold == 5000
    monkeypatch.setenv("PANELWRIGHT_GC_YOUNG_THRESHOLD", "-1")
    with pytest.raises(ValueError):
        Settings()
