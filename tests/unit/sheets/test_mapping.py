"""Header finding and column guessing."""

from __future__ import annotations

import pytest

from server.sheets.errors import MappingError
from server.sheets.mapping import Role, column_index, column_letter, guess_mapping, guess_role, parse_overrides
from server.sheets.reader import Grid


@pytest.mark.parametrize(
    ("header", "role"),
    [
        ("Ckt #", Role.SLOT),
        ("Circuit No.", Role.SLOT),
        ("Circuit Description", Role.DESCRIPTION),
        ("Load (VA)", Role.LOAD_VA),
        ("kVA", Role.LOAD_KVA),
        ("Load Amps", Role.LOAD_AMPS),
        ("Poles", Role.POLES),
        ("Trip", Role.BREAKER),
        ("Brkr", Role.BREAKER),
        ("Phase", Role.PHASE),
        ("Load Type", Role.CATEGORY),
        ("Remarks", Role.NOTES),
        ("Power factor", Role.PF),
    ],
)
def test_guess_role(header, role):
    assert guess_role(header) == role


def _grid(rows):
    rows = tuple(tuple(r) for r in rows)
    return Grid("S", rows, width=max(len(r) for r in rows))


def test_plain_amps_beside_a_va_column_is_the_breaker():
    cmap = guess_mapping(_grid([["Ckt", "Description", "VA", "Amps"], [1, "A", 100, 20]]))
    assert cmap.roles[3] == Role.BREAKER
    cmap = guess_mapping(_grid([["Ckt", "Description", "Amps"], [1, "A", 8.5]]))
    assert cmap.roles[2] == Role.LOAD_AMPS


def test_header_below_a_title_block():
    cmap = guess_mapping(_grid([["Panel LP-1 schedule"], [], ["Slot", "Name", "kVA"], [1, "A", 1.0]]))
    assert cmap.header_row == 2 and cmap.roles == (Role.SLOT, Role.DESCRIPTION, Role.LOAD_KVA)


def test_no_header_is_a_clear_error():
    with pytest.raises(MappingError, match="no header row found"):
        guess_mapping(_grid([[1, 2, 3], [4, 5, 6]]))


def test_overrides_by_letter_and_header_text_and_row():
    grid = _grid([["x"], ["Ckt", "Description", "Load", "Misc"], [1, "A", 1500, "n"]])
    base = guess_mapping(grid)
    cmap = parse_overrides('{"columns": {"C": "kva", "Misc": "notes"}}', grid, base)
    assert cmap.roles == (Role.SLOT, Role.DESCRIPTION, Role.LOAD_KVA, Role.NOTES)
    # one role per column: giving "slot" to D takes it from A
    assert parse_overrides({"columns": {"D": "slot"}}, grid, base).roles[0] == Role.IGNORE
    moved = parse_overrides({"header_row": 2}, grid)
    assert moved.header_row == 1


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("{bad", "not valid JSON"),
        ('{"columns": {"C": "wattage"}}', "is not a role"),
        ('{"columns": {"Q": "va"}}', "neither a column letter nor a header"),
        ('{"header_row": 0}', "header_row must be a row number"),
        ('{"colums": {}}', "unknown keys"),
    ],
)
def test_bad_overrides_are_named(text, message):
    grid = _grid([["Ckt", "Description"], [1, "A"]])
    with pytest.raises(MappingError, match=message):
        parse_overrides(text, grid, guess_mapping(grid))


def test_column_letters_round_trip():
    for i in (0, 25, 26, 701, 702):
        assert column_index(column_letter(i)) == i
    assert column_letter(27) == "AB"
