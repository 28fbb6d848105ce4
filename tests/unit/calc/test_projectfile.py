"""The version-1 project file: every rule of the format is enforced with a message naming
the tag, slot and field; writing and reading back loses nothing."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest

from server.calc.errors import ProjectFileError
from server.calc.model import Category, Status
from server.calc.projectfile import dump_project, dumps_project, load_project_file, loads_project, parse_project

SMALL = Path(__file__).parent / "data" / "small_project.json"


def _base() -> dict:
    return {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "Rules (invented)"},
        "sources": [{"tag": "S", "system": "208Y/120 3PH 4W"}],
        "transformers": [],
        "panels": [
            {
                "tag": "P1",
                "system": "208Y/120 3PH 4W",
                "fed_from": "S",
                "spaces": 12,
                "circuits": [{"slot": 1, "category": "lighting", "va": 1000}],
            }
        ],
    }


def _problems(data) -> list:
    with pytest.raises(ProjectFileError) as err:
        parse_project(data)
    return err.value.problems


def _one(data, *, tag=None, slot=None, field=None, words=()):
    problems = _problems(data)
    match = [
        p
        for p in problems
        if (tag is None or p.tag == tag) and (slot is None or p.slot == slot) and (field is None or p.field == field)
    ]
    assert match, [p.describe() for p in problems]
    for w in words:
        assert any(w in p.message for p in match), (w, [p.describe() for p in match])
    return match[0]


def _circ(data, **c):
    data["panels"][0]["circuits"].append(c)
    return data


def test_the_base_file_is_valid() -> None:
    project = parse_project(_base())
    assert project.panels[0].circuits[0].category == Category.LIGHTING


def test_overlap_names_both_slots() -> None:
    d = _circ(_base(), slot=3, poles=3, va=3000)  # 3, 5, 7
    _circ(d, slot=5, va=100)
    p = _one(d, tag="P1", slot=5, field="slot", words=("3", "5", "overlap"))
    assert "slots 3 and 5" in p.message


def test_slot_beyond_spaces() -> None:
    _one(_circ(_base(), slot=13, va=10), tag="P1", slot=13, words=("beyond",))
    _one(_circ(_base(), slot=9, poles=3, va=10), tag="P1", slot=9, words=("needs slot 13",))


def test_one_pole_on_a_3_wire_delta() -> None:
    d = _base()
    d["sources"][0]["system"] = "480 3PH 3W"
    d["panels"][0]["system"] = "480 3PH 3W"
    _one(d, tag="P1", slot=1, field="poles", words=("no neutral",))


def test_line_to_neutral_on_the_high_leg() -> None:
    d = _base()
    d["sources"][0]["system"] = "240/120 3PH 4W"
    d["panels"][0]["system"] = "240/120 3PH 4W"
    d["panels"][0]["circuits"] = [{"slot": 3, "va": 500}]  # row 2 = B, the high leg
    _one(d, tag="P1", slot=3, field="slot", words=("high leg",))
    d["panels"][0]["circuits"] = [{"slot": 5, "va": 500}, {"slot": 3, "poles": 2, "va": 500, "slot_note": "B-C 240 V"}]
    with pytest.raises(ProjectFileError):  # 3 (2-pole) takes 3 and 5: overlap
        parse_project(d)
    d["panels"][0]["circuits"] = [{"slot": 3, "poles": 2, "va": 500}]  # 240 V across B–C is fine
    assert parse_project(d).panels[0].circuits[0].poles == 2


def test_two_pole_on_a_2_wire_system_and_three_pole_on_single_phase() -> None:
    d = _base()
    d["sources"][0]["system"] = "277 1PH 2W"
    d["panels"][0]["system"] = "277 1PH 2W"
    d["panels"][0]["circuits"] = [{"slot": 1, "poles": 2, "va": 500}]
    _one(d, tag="P1", slot=1, field="poles", words=("2-pole",))
    d["sources"][0]["system"] = "120/240 1PH 3W"
    d["panels"][0]["system"] = "120/240 1PH 3W"
    d["panels"][0]["circuits"] = [{"slot": 1, "poles": 3, "va": 500}]
    _one(d, tag="P1", slot=1, field="poles", words=("3-pole",))


@pytest.mark.parametrize(
    ("field", "value", "words"),
    [
        ("va", -5, ("at least 0",)),
        ("pf", 0, ("greater than 0",)),
        ("pf", 1.2, ("at most 1",)),
        ("harmonic3_pct", 400, ("at most 300",)),
        ("breaker_amps", 0, ("at least 1",)),
        ("category", "toaster", ("not one of",)),
        ("status", "maybe", ("not one of",)),
    ],
)
def test_circuit_value_rules(field, value, words) -> None:
    d = _base()
    d["panels"][0]["circuits"][0][field] = value
    _one(d, tag="P1", slot=1, field=field, words=words)


def test_feed_loops_are_refused() -> None:
    d = _base()
    d["panels"].append({"tag": "P2", "system": "208Y/120 3PH 4W", "circuits": [{"slot": 1, "poles": 3, "feeds": "P3"}]})
    d["panels"].append({"tag": "P3", "system": "208Y/120 3PH 4W", "circuits": [{"slot": 1, "poles": 3, "feeds": "P2"}]})
    problems = _problems(d)
    assert any("loop" in p.message and "P2" in p.message and "P3" in p.message for p in problems), problems


def test_dangling_tags() -> None:
    d = _circ(_base(), slot=3, poles=3, feeds="LP-9")
    _one(d, tag="P1", slot=3, field="feeds", words=("LP-9", "not a panel"))
    d = _base()
    d["panels"][0]["fed_from"] = "NOWHERE"
    _one(d, tag="P1", field="fed_from", words=("NOWHERE",))
    d = _base()
    d["panels"][0]["fed_from"] = None
    _one(d, tag="P1", field="fed_from", words=("not fed",))


def test_duplicate_tags() -> None:
    d = _base()
    d["transformers"].append(
        {"tag": "P1", "kva": 45, "primary": "480 3PH 3W", "secondary": "208Y/120 3PH 4W", "fed_from": "S"}
    )
    _one(d, tag="P1", field="tag", words=("duplicate",))


def test_system_mismatch() -> None:
    d = _base()
    d["panels"].append({"tag": "P2", "system": "480Y/277 3PH 4W", "circuits": []})
    _circ(d, slot=3, poles=3, feeds="P2")
    _one(d, tag="P2", field="system", words=("does not match", "P1"))
    d = _base()
    d["transformers"].append(
        {"tag": "T", "kva": 45, "primary": "480 3PH 3W", "secondary": "208Y/120 3PH 4W", "fed_from": "S"}
    )
    _one(d, tag="T", field="primary", words=("does not match",))


def test_typed_va_on_a_feeds_circuit() -> None:
    d = _base()
    d["panels"].append({"tag": "P2", "system": "208Y/120 3PH 4W", "circuits": []})
    _circ(d, slot=3, poles=3, feeds="P2", va=5000)
    _one(d, tag="P1", slot=3, field="va", words=("computed", "never typed"))


def test_wrong_pole_count_feeding_a_panel() -> None:
    d = _base()
    d["panels"].append({"tag": "P2", "system": "208Y/120 3PH 4W", "circuits": []})
    _circ(d, slot=3, poles=2, feeds="P2")
    _one(d, tag="P1", slot=3, field="poles", words=("needs 3 poles",))


def test_unknown_system_and_format_version() -> None:
    d = _base()
    d["panels"][0]["system"] = "208/120"
    _one(d, tag="P1", field="system", words=("unknown system", "208Y/120 3PH 4W"))
    d = _base()
    d["version"] = 2
    _one(d, field="version", words=("not supported",))


def test_every_problem_is_reported_not_just_the_first() -> None:
    d = _base()
    d["panels"][0]["circuits"] = [{"slot": 1, "va": -1}, {"slot": 3, "pf": 3}, {"slot": 40, "va": 1}]
    assert len(_problems(d)) >= 3


def test_round_trip_loses_nothing() -> None:
    project = load_project_file(SMALL)
    text = dumps_project(project)
    again = loads_project(text)
    assert again == project
    assert dump_project(again) == json.loads(text)
    lp2 = again.panel("LP-2")
    assert lp2 is not None and {c.status for c in lp2.circuits} >= {Status.FUTURE, Status.REMOVED}


def test_file_errors_name_the_file(tmp_path: Path) -> None:
    with pytest.raises(ProjectFileError) as err:
        load_project_file(tmp_path / "missing.json")
    assert "missing.json" in err.value.describe()
    bad = tmp_path / "bad.json"
    bad.write_text("[1, 2")
    with pytest.raises(ProjectFileError) as err:
        load_project_file(bad)
    assert "bad.json" in err.value.describe() and "line 1" in err.value.describe()


def test_input_dict_is_not_modified() -> None:
    d = _base()
    before = copy.deepcopy(d)
    parse_project(d)
    assert d == before


def test_one_pole_feeding_breaker_on_a_delta_is_refused() -> None:
    d = _base()
    d["sources"][0]["system"] = "480 3PH 3W"
    d["panels"][0]["system"] = "480 3PH 3W"
    d["panels"][0]["circuits"] = [{"slot": 1, "poles": 1, "feeds": "X"}]
    d["transformers"].append({"tag": "X", "kva": 5, "primary": "480 3PH 3W", "secondary": "120 1PH 2W"})
    _one(d, tag="P1", slot=1, field="poles", words=("no neutral",))
    d["panels"][0]["circuits"] = [{"slot": 1, "poles": 2, "feeds": "X"}]
    assert parse_project(d).transformers[0].tag == "X"


def test_three_phase_primary_on_a_single_phase_source_is_refused() -> None:
    d = _base()
    d["sources"][0]["system"] = "120/240 1PH 3W"
    d["panels"][0]["system"] = "120/240 1PH 3W"
    d["transformers"].append(
        {"tag": "X", "kva": 15, "primary": "240 3PH 3W", "secondary": "208Y/120 3PH 4W", "fed_from": "S"}
    )
    _one(d, tag="X", field="primary", words=("three-phase primary",))


# --------------------------------------------------------------------------- feeder_rotation


def test_feeder_rotation_is_optional_and_round_trips() -> None:
    d = _base()
    assert parse_project(d).panels[0].feeder_rotation == 0
    assert "feeder_rotation" not in dump_project(parse_project(d))["panels"][0]  # omitted when 0
    d["panels"][0]["feeder_rotation"] = 2
    project = parse_project(d)
    assert project.panels[0].feeder_rotation == 2
    dumped = dump_project(project)
    assert dumped["panels"][0]["feeder_rotation"] == 2
    assert parse_project(dumped) == project


@pytest.mark.parametrize("value", [3, -1, 1.5, "two", True])
def test_feeder_rotation_must_be_0_1_or_2(value) -> None:
    d = _base()
    d["panels"][0]["feeder_rotation"] = value
    _one(d, tag="P1", field="feeder_rotation")


def test_feeder_rotation_needs_three_phase_without_high_leg() -> None:
    for system, words in (("240/120 3PH 4W", ("high leg", "240/120")), ("120/240 1PH 3W", ("three-phase",))):
        d = _base()
        d["sources"][0]["system"] = system
        d["panels"][0]["system"] = system
        d["panels"][0]["feeder_rotation"] = 1
        _one(d, tag="P1", field="feeder_rotation", words=words)
    d = _base()  # a 3-wire delta without a high leg may be rotated
    d["sources"][0]["system"] = d["panels"][0]["system"] = "480 3PH 3W"
    d["panels"][0]["circuits"] = [{"slot": 1, "poles": 3, "va": 9000}]
    d["panels"][0]["feeder_rotation"] = 1
    assert parse_project(d).panels[0].feeder_rotation == 1


def test_feeder_rotation_needs_a_rotatable_feeding_system() -> None:
    d = _base()
    d["sources"][0]["system"] = "240/120 3PH 4W"
    d["panels"][0]["feeder_rotation"] = 1
    _one(d, tag="P1", field="feeder_rotation", words=("feeding system", "S is 240/120 3PH 4W"))
