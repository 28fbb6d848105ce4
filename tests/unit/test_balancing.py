"""The balancing service's pure helpers: the options form, the moves the forms carry, the panel fingerprint."""

from __future__ import annotations

from dataclasses import replace

import pytest

from server.balancing import format_moves, option_values, panel_fingerprint, parse_moves, parse_options
from server.calc.balance import BalanceOptions, Move, Objective, inverse_moves
from server.calc.projectfile import load_project_file
from server.services import EditRejected
from tests.helpers import DEMO_FILE


def test_blank_form_gives_the_cli_defaults():
    assert parse_options({}) == BalanceOptions()


def test_every_option_is_read_and_written_back():
    form = {"objective": "neutral", "max_moves": "4", "keep_sides": "on", "allow_spaces": "on", "include_future": "yes"}
    options = parse_options(form)
    assert options == BalanceOptions(
        objective=Objective.NEUTRAL, max_moves=4, keep_sides=True, allow_spaces=True, include_future=True
    )
    assert option_values(options) == form
    assert parse_options({"include_future": "no"}).include_future is False


@pytest.mark.parametrize(
    ("form", "field", "words"),
    [
        ({"objective": "sideways"}, "objective", "not an objective"),
        ({"max_moves": "-1"}, "max_moves", "whole number"),
        ({"max_moves": "2.5"}, "max_moves", "whole number"),
        ({"max_moves": "5000"}, "max_moves", "at most 999"),
        ({"include_future": "maybe"}, "include_future", "choose"),
    ],
)
def test_bad_options_are_named_by_field(form, field, words):
    with pytest.raises(EditRejected) as exc:
        parse_options(form)
    assert words in exc.value.by_field()[field]


def test_moves_round_trip_and_inverse():
    moves = (Move(1, 3), Move(3, 8), Move(8, 1))
    text = format_moves(moves)
    assert text == "1:3 3:8 8:1"
    assert parse_moves(text, "LP-1") == moves
    assert parse_moves(format_moves(inverse_moves(moves)), "LP-1") == (Move(1, 8), Move(3, 1), Move(8, 3))


@pytest.mark.parametrize("text", ["", "  ", "1-3", "1:3 x", "1:", ":3", "12345:1"])
def test_malformed_moves_are_refused(text):
    with pytest.raises(EditRejected) as exc:
        parse_moves(text, "LP-1")
    assert exc.value.problems[0].tag == "LP-1" and exc.value.problems[0].field == "moves"


def test_fingerprint_changes_with_any_circuit_field_and_not_otherwise():
    panel = load_project_file(DEMO_FILE).panel("LP-1")
    assert panel is not None
    fp = panel_fingerprint(panel)
    assert len(fp) == 64 and fp == panel_fingerprint(replace(panel))
    first = panel.circuits[0]
    for change in ({"notes": "x"}, {"va": (first.va or 0) + 1}, {"slot": 21}):
        changed = replace(panel, circuits=(replace(first, **change), *panel.circuits[1:]))
        assert panel_fingerprint(changed) != fp, change
