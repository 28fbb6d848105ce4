"""server.pdf.deltas: which circuits and values changed between two project files."""

from __future__ import annotations

import copy

from server.pdf.deltas import NO_DELTAS, diff_projects


def _project() -> dict:
    return {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "Test"},
        "sources": [{"tag": "S", "system": "208Y/120 3PH 4W", "fault_ka": 10}],
        "transformers": [],
        "panels": [
            {
                "tag": "P1",
                "system": "208Y/120 3PH 4W",
                "fed_from": "S",
                "bus_amps": 225,
                "feeder": {"length_ft": 50},
                "circuits": [
                    {"slot": 1, "poles": 1, "description": "Lights", "va": 1000},
                    {"slot": 2, "poles": 2, "description": "Heater", "va": 3000},
                    {"slot": 5, "poles": 1, "description": "Spare", "va": 0},
                ],
            }
        ],
    }


def test_identical_files_have_no_deltas():
    d = diff_projects(_project(), _project(), revision=2)
    assert d.empty and d.revision == 2
    assert NO_DELTAS.empty


def test_int_and_float_of_the_same_value_are_equal():
    b = _project()
    b["panels"][0]["circuits"][0]["va"] = 1000.0
    assert diff_projects(_project(), b).empty


def test_edited_added_and_removed_circuits_mark_their_first_slot():
    b = copy.deepcopy(_project())
    circuits = b["panels"][0]["circuits"]
    circuits[0]["description"] = "Lights, east"  # edited
    del circuits[1]  # removed 2-pole at 2 (slots 2 and 4)
    circuits.append({"slot": 7, "poles": 1, "description": "New", "va": 100})  # added
    d = diff_projects(_project(), b)
    assert d.circuits == {("P1", 1), ("P1", 2), ("P1", 7)}
    assert d.touches("P1")
    assert not d.circuit("P1", 4)  # the second pole of the removed breaker is not its row


def test_panel_fields_and_feeder_are_values():
    b = copy.deepcopy(_project())
    b["panels"][0]["bus_amps"] = 400
    b["panels"][0]["feeder"]["length_ft"] = 80
    d = diff_projects(_project(), b)
    assert d.value("P1", "bus_amps") and d.value("P1", "feeder")
    assert not d.circuits


def test_new_elements_are_new_not_marked_row_by_row():
    b = copy.deepcopy(_project())
    b["panels"].append({"tag": "P2", "system": "208Y/120 3PH 4W", "circuits": [{"slot": 1, "va": 5}]})
    d = diff_projects(_project(), b)
    assert d.new_elements == {"P2"}
    assert not any(t == "P2" for t, _ in d.circuits)


def test_printed_values_mark_only_what_prints_differently():
    prev = {"P1": {"demand_va": "10,000", "fault_ka": "10.0 kA", "circuit.2": "1,500 1,500"}}
    cur = {"P1": {"demand_va": "10,000", "fault_ka": "9.8 kA", "circuit.2": "1,600 1,600"}}
    d = diff_projects(_project(), _project(), previous_values=prev, current_values=cur)
    assert d.values == {("P1", "fault_ka")}
    assert d.circuits == {("P1", 2)}  # a computed feeds-circuit load that prints differently
