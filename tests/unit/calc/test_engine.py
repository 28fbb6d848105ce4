"""End-to-end engine checks on a small project with hand-computed answers.

The project (tests/unit/calc/data/small_project.json, invented):

    UTIL (480Y/277, infinite bus)
     └─ MDP (480Y/277; feeder 0 ft)
         ├─ slot 1 3P 125 A → T1 75 kVA 480Δ–208Y/120, 5 %Z, primary feeder 0 ft
         │    └─ LP-1 (208Y/120; feeder 20 ft)
         │         └─ slot 13 3P 70 A → LP-2 (208Y/120; 50 A bus; feeder 40 ft)
         ├─ slot 2 3P motor 20 000 VA
         ├─ slot 7 1P lighting 10 000 VA (A)
         └─ slot 8 1P receptacle 2 000 VA (A)

Every load is at unity power factor so the phasor arithmetic can be done by hand
(V_A = 120∠0°, V_B = 120∠−120°, V_C = 120∠120°, V_AB = 207.85∠30°):

LP-2 (own only; the future circuit and the removed one do not count):
  A: receptacle 4 000 + kitchen 1 800 + ½ pump 1 500 = 7 300 VA; B: 4 000 + 1 200 + 1 500 = 6 700;
  C: 4 000.  Total 18 000 VA.
  I_A = 5 800/120 ∠0 + 3 000/207.85 ∠30 = 48.333 + (12.5 + j7.217) → |I_A| = 61.26 A
  I_B = 5 200/120 ∠−120 − 14.434 ∠30 → |I_B| = 56.30 A;  I_C = 4 000/120 = 33.33 A
  I_N = |48.333∠0 + 43.333∠−120 + 33.333∠120| = |10 − j… | = 13.229 A
  Demand: receptacles 10 000 + 50 % × 2 000 = 11 000; kitchen 2 units at 100 % = 3 000;
  motor 3 000 + 25 % × 3 000 = 750 → 17 750 VA.  Nothing continuous.
  design = 61.26 × 17 750/18 000 = 60.41 A > 50 A bus → bus-overload.

LP-1 (own + LP-2): A 18 866.67, B 17 366.67, C 11 666.67 VA (47 900 VA).
  Receptacles 18 000 + 12 000 = 30 000 → 10 000 + 50 % × 20 000 = 20 000 (the 10 kVA at 100 %
  is taken once at this feeder, not once per panel: 11 000 + 16 000 = 27 000 would be wrong);
  kitchen 4 units (2 here + 2 in LP-2) at 80 % of 5 500 = 4 400 (≥ two largest 1 800 + 1 500);
  lighting 4 400 at 100 % (all continuous); motors 8 000 + 25 % × 5 000 (largest here, not the
  3 000 VA pump) = 1 250 → 38 050 VA.  design_va = 38 050 + 0.25 × 4 400 = 39 150.
  |I| = 157.39 / 144.90 / 97.22 A; design = 157.39 × 39 150/47 900 = 128.64 A.

T1: load = 38.05 kVA → 50.73 % of 75 kVA; suggested 38.05 × 1.25 = 47.6 → 75 kVA (next standard
  three-phase rating after 45); FLA 75 000/(√3·480) = 90.21 A and 75 000/(√3·208) = 208.18 A;
  NEC Table 450.3(B): primary-only 125 % → 112.8 → 125 A (next size up), secondary 125 % → 260.2
  → 300 A.  Infinite source and 0 ft primary feeder: secondary fault = FLA × 100/%Z = 4.164 kA.
  Primary currents (Δ–Y, I_A = (I_a − I_b)/4 · e^{−j30°}): 67.20 / 52.02 / 54.94 A.

MDP: T1's 47 900 VA spread evenly (15 966.67 per pole) + motor 20 000/3 per phase + 12 000 VA on A
  → A 34 633.33, B = C 22 633.33 (79 900 VA).  Receptacles 32 000 → 21 000; kitchen 4 units → 4 400;
  lighting 14 400 (continuous); motors 28 000 + 25 % × 20 000 → 72 800 VA; design_va 76 400.
  I_A = 67.20-A phasor + 24.07 A motor + 43.32 A lighting/receptacles → 134.57 A; I_N = 12 000/277
  = 43.32 A (T1's delta primary returns nothing on the neutral); design = 134.57 × 76 400/79 900
  = 128.68 A.
"""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import pytest

from server.calc.engine import Calculator, compute_project
from server.calc.model import Circuit, Panel, Project, ProjectInfo, Source
from server.calc.projectfile import load_project_file, loads_project, replace_panel
from server.calc.results import WarningCode
from tests.helpers import assert_close

DATA = Path(__file__).parent / "data" / "small_project.json"


@pytest.fixture(scope="module")
def project():
    return load_project_file(DATA)


@pytest.fixture(scope="module")
def result(project):
    return compute_project(project)


def test_lp2_hand_numbers(result) -> None:
    p = result.panels["LP-2"]
    assert p.connected_va == pytest.approx({"A": 7_300.0, "B": 6_700.0, "C": 4_000.0})
    assert_close(p.connected_va_total, 18_000.0)
    assert_close(p.demand_va, 17_750.0)
    assert_close(p.line_amps["A"], 61.26)
    assert_close(p.line_amps["B"], 56.298)
    assert_close(p.line_amps["C"], 33.333)
    assert_close(p.neutral_amps, 13.229)
    assert_close(p.design_amps, 60.409)
    assert_close(p.imbalance_pct, 100 * (6_000 - 4_000) / 6_000)  # average 6 000 VA, C is 2 000 below
    assert p.largest_motor_va == 3_000.0


def test_receptacle_allowance_taken_at_the_feeder(result) -> None:
    lp1 = result.panels["LP-1"]
    steps = {s.category: s for s in lp1.demand_steps}
    assert_close(steps["receptacle"].connected_va, 30_000.0)
    assert_close(steps["receptacle"].demand_va, 20_000.0)  # not 11 000 + 16 000
    # Kitchen units are counted across panels: 4 units → 80 % (NFPA 70-2023 Table 220.56, from memory).
    assert_close(steps["kitchen"].demand_va, 0.8 * 5_500.0)
    # Largest motor at each node: LP-2 its own pump, LP-1 the 5 kVA fan, MDP the 20 kVA compressor.
    assert result.panels["LP-1"].largest_motor_va == 5_000.0
    assert result.panels["MDP"].largest_motor_va == 20_000.0
    assert_close(lp1.demand_va, 38_050.0)
    assert_close(lp1.continuous_demand_va, 4_400.0)
    assert_close(lp1.design_amps, 128.637)
    assert_close(lp1.line_amps["A"], 157.388)
    assert_close(lp1.neutral_amps, 42.647)


def test_transformer_hand_numbers(result) -> None:
    t = result.transformers["T1"]
    assert_close(t.load_kva, 38.05)
    assert_close(t.loading_pct, 100 * 38.05 / 75)
    assert_close(t.fla_primary, 90.211)
    assert_close(t.fla_secondary, 208.179)
    assert t.suggested_kva == 75.0
    assert t.primary_ocpd_amps == 125
    assert t.secondary_ocpd_amps == 300
    assert_close(t.secondary_fault_ka, 4.1636)
    assert_close(t.primary_line_amps["A"], 67.195)
    assert_close(t.primary_line_amps["B"], 52.024)
    assert_close(t.primary_line_amps["C"], 54.939)
    # The primary feeder is sized for 125 % of the rated primary current (112.8 A) on the 125 A breaker.
    assert t.feeder is not None and t.feeder.ocpd_amps == 125


def test_mdp_and_service(result) -> None:
    m = result.panels["MDP"]
    assert m.connected_va == pytest.approx({"A": 34_633.333, "B": 22_633.333, "C": 22_633.333})
    assert_close(m.demand_va, 72_800.0)
    assert_close(m.line_amps["A"], 134.575)
    assert_close(m.neutral_amps, 43.321)
    assert_close(m.design_amps, 128.68)
    assert m.fault_ka is None  # infinite bus, 0 ft feeder
    s = result.sources["UTIL"]
    assert_close(s.connected_va, 79_900.0)
    assert_close(s.demand_va, 72_800.0)
    assert [st.category for st in s.demand_steps][-1] == "largest_motor"


def test_connected_va_is_conserved(result) -> None:
    lp1, lp2, mdp = (result.panels[t] for t in ("LP-1", "LP-2", "MDP"))
    own_lp1 = 6_000 * 3 + 1_500 + 1_000 + 5_000 + 2_400 + 2_000
    assert_close(lp1.connected_va_total, own_lp1 + lp2.connected_va_total)
    assert_close(mdp.connected_va_total, 32_000 + lp1.connected_va_total)


def test_future_counts_only_when_asked_and_removed_never(project) -> None:
    with_future = compute_project(project, include_future=True)
    lp2 = with_future.panels["LP-2"]
    assert_close(lp2.connected_va_total, 20_000.0)  # + the 2 000 VA future circuit, never the removed 9 999
    assert_close(lp2.connected_va["C"], 6_000.0)
    assert with_future.include_future
    # The project's own setting is the default.
    flagged = replace(project, project=replace(project.project, include_future=True))
    assert_close(compute_project(flagged).panels["LP-2"].connected_va_total, 20_000.0)
    assert_close(compute_project(flagged, include_future=False).panels["LP-2"].connected_va_total, 18_000.0)


def test_cumulative_voltage_drop_and_fault_top_down(result) -> None:
    lp1, lp2 = result.panels["LP-1"], result.panels["LP-2"]
    t = result.transformers["T1"]
    assert lp1.feeder is not None and lp2.feeder is not None and t.feeder is not None
    assert_close(
        lp1.feeder.cumulative_voltage_drop_pct, t.feeder.cumulative_voltage_drop_pct + lp1.feeder.voltage_drop_pct
    )
    assert_close(
        lp2.feeder.cumulative_voltage_drop_pct, lp1.feeder.cumulative_voltage_drop_pct + lp2.feeder.voltage_drop_pct
    )
    assert lp2.feeder.voltage_drop_pct > 0
    assert lp1.fault_ka is not None and lp2.fault_ka is not None
    assert lp2.fault_ka < lp1.fault_ka < t.secondary_fault_ka


def _codes(panel_result) -> set[str]:
    return {w.code.value for w in panel_result.warnings}


def test_warning_codes_where_expected(result) -> None:
    lp2, lp1, mdp = result.panels["LP-2"], result.panels["LP-1"], result.panels["MDP"]
    assert "bus-overload" in _codes(lp2)
    assert "bus-overload" not in _codes(lp1)
    assert "phase-imbalance" in _codes(mdp)  # 33.4 % over the 10 % limit
    under = [w for w in lp1.warnings if w.code == WarningCode.BREAKER_UNDERSIZED]
    # 2 000 VA continuous at 120 V = 16.67 A; × 1.25 = 20.8 A > 20 A (NFPA 70-2023 210.20(A)).
    assert [w.slot for w in under] == [9]
    assert "LP-1" in under[0].message and "slot 9" in under[0].message
    assert "sccr-below-fault" not in _codes(lp1)  # 3.9 kA on a 10 kA rating
    assert "transformer-overload" not in {w.code.value for w in result.transformers["T1"].warnings}
    # Project warnings: all of them, errors first, then by tag.
    assert len(result.warnings) == sum(len(p.warnings) for p in result.panels.values()) + sum(
        len(t.warnings) for t in result.transformers.values()
    )
    ranks = [{"error": 0, "warning": 1, "note": 2}[w.severity.value] for w in result.warnings]
    assert ranks == sorted(ranks)


def test_every_warning_message_names_its_tag_and_slot(project) -> None:
    data = json.loads(DATA.read_text())
    data["panels"][2]["feeder"] = {"length_ft": 900, "size": "6"}  # feeder warnings from the sizing module too
    res = compute_project(loads_project(json.dumps(data)))
    assert {"vdrop-feeder", "vdrop-total"} <= {w.code.value for w in res.warnings}
    for w in res.warnings:
        assert w.message.startswith(w.tag), w.message
        if w.slot is not None:
            assert f"slot {w.slot}" in w.message


def test_overload_sccr_vdrop_spaces_and_high_leg_warnings(project) -> None:
    data = json.loads(DATA.read_text())
    data["sources"][0]["fault_ka"] = 65
    data["sources"][0]["x_over_r"] = 8
    data["transformers"][0]["kva"] = 30  # 38.05 kVA demand on 30 kVA → 127 %
    mdp = data["panels"][0]
    mdp["sccr_ka"] = 42
    lp2 = data["panels"][2]
    lp2["feeder"] = {"length_ft": 900, "size": "6"}  # a given size is checked, never replaced
    lp2["spaces"] = 10
    lp2["circuits"] = [c for c in lp2["circuits"] if c["slot"] not in (11, 12)] + [
        {"slot": 6, "poles": 1, "category": "equipment", "va": 100, "pf": 1.0, "breaker_amps": 20},
        {"slot": 8, "poles": 1, "category": "equipment", "va": 100, "pf": 1.0, "breaker_amps": 20},
        {"slot": 10, "poles": 1, "category": "equipment", "va": 100, "pf": 1.0, "breaker_amps": 20},
    ]
    res = compute_project(loads_project(json.dumps(data)))
    assert "sccr-below-fault" in _codes(res.panels["MDP"])
    assert_close(res.panels["MDP"].fault_ka, 65.0)  # 0 ft feeder: the source level
    assert "transformer-overload" in {w.code.value for w in res.transformers["T1"].warnings}
    codes = _codes(res.panels["LP-2"])
    assert {"vdrop-feeder", "vdrop-total", "spaces-exhausted"} <= codes
    # With a finite source the transformer secondary fault is below the infinite-bus value.
    assert res.transformers["T1"].secondary_fault_ka < 30_000 / (3**0.5 * 208) * 100 / 5 / 1000


def test_high_leg_misuse_warning() -> None:
    data = {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "High-leg shop (invented)"},
        "sources": [{"tag": "S", "system": "240/120 3PH 4W"}],
        "panels": [
            {
                "tag": "HL",
                "system": "240/120 3PH 4W",
                "fed_from": "S",
                "circuits": [
                    {"slot": 1, "category": "receptacle", "va": 1500, "breaker_amps": 20},
                    {"slot": 2, "category": "receptacle", "va": 1500, "breaker_amps": 20},
                    {"slot": 7, "category": "lighting", "va": 1200, "breaker_amps": 20},
                    {"slot": 3, "poles": 2, "category": "motor", "va": 1000, "breaker_amps": 20},
                ],
            }
        ],
    }
    res = compute_project(loads_project(json.dumps(data)))
    assert "high-leg-misuse" in _codes(res.panels["HL"])
    data["panels"][0]["circuits"].append({"slot": 9, "poles": 3, "category": "motor", "va": 20000, "breaker_amps": 70})
    res = compute_project(loads_project(json.dumps(data)))
    assert "high-leg-misuse" not in _codes(res.panels["HL"])


def test_json_keys_exactly_as_the_format_requires(result) -> None:
    j = result.to_json()
    assert set(j) >= {"code", "include_future", "panels", "transformers", "sources", "warnings"}
    assert j["code"] == "NEC-2023"
    panel_keys = {
        "connected_va",
        "connected_va_total",
        "demand_va",
        "line_amps",
        "neutral_amps",
        "imbalance_pct",
        "design_amps",
        "feeder",
        "fault_ka",
        "warnings",
    }
    feeder_keys = {
        "ocpd_amps",
        "conductor",
        "material",
        "sets",
        "egc",
        "voltage_drop_pct",
        "cumulative_voltage_drop_pct",
    }
    for tag in ("MDP", "LP-1", "LP-2"):
        p = j["panels"][tag]
        assert panel_keys <= set(p), tag
        assert feeder_keys <= set(p["feeder"]), tag
        assert set(p["line_amps"]) == {"A", "B", "C"}
        for w in p["warnings"]:
            assert {"code", "message"} <= set(w)
    t = j["transformers"]["T1"]
    assert {
        "load_kva",
        "loading_pct",
        "fla_primary",
        "fla_secondary",
        "secondary_fault_ka",
        "suggested_kva",
        "primary_ocpd_amps",
        "secondary_ocpd_amps",
    } <= set(t)
    json.dumps(j, allow_nan=False)  # plain JSON: no NaN or infinity


def test_neutral_is_null_without_a_neutral_and_phase_keys_follow_the_system() -> None:
    data = {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "Keys (invented)"},
        "sources": [{"tag": "S", "system": "480 3PH 3W"}, {"tag": "R", "system": "120/240 1PH 3W"}],
        "transformers": [
            {"tag": "X", "kva": 10, "primary": "120/240 1PH 3W", "secondary": "120 1PH 2W", "fed_from": "R"}
        ],
        "panels": [
            {"tag": "D", "system": "480 3PH 3W", "fed_from": "S", "circuits": [{"slot": 1, "poles": 3, "va": 9000}]},
            {"tag": "P", "system": "120/240 1PH 3W", "fed_from": "R", "circuits": [{"slot": 1, "va": 1200}]},
            {"tag": "Q", "system": "120 1PH 2W", "fed_from": "X", "circuits": [{"slot": 1, "va": 1200}]},
        ],
    }
    res = compute_project(loads_project(json.dumps(data)))
    assert res.panels["D"].neutral_amps is None
    assert set(res.panels["D"].line_amps) == {"A", "B", "C"}
    assert set(res.panels["P"].line_amps) == {"A", "B"}
    assert set(res.panels["Q"].line_amps) == {"A"}
    assert_close(res.panels["Q"].neutral_amps, 10.0)
    # Empty-ish: a single-phase panel has no imbalance figure to speak of beyond its two lines.
    assert_close(res.panels["P"].imbalance_pct, 100.0)


def test_update_panel_equals_full_compute(project) -> None:
    calc = Calculator(project)
    lp2 = project.panel("LP-2")
    assert lp2 is not None
    circuits = list(lp2.circuits)
    circuits[0] = replace(circuits[0], va=7_000.0)
    edited = replace(lp2, circuits=tuple(circuits))
    inc = calc.update_panel(edited)
    full = compute_project(replace_panel(project, edited))
    assert inc == full
    assert inc.panels["LP-2"].connected_va["A"] == pytest.approx(10_300.0)
    # A topology change (a new sub-panel feed) rebuilds the tree and still matches.
    lp1 = calc.project.panel("LP-1")
    assert lp1 is not None
    moved = replace(
        lp1,
        circuits=tuple(c if c.feeds != "LP-2" else replace(c, breaker_amps=90) for c in lp1.circuits)
        + (Circuit(slot=20, poles=1, category=None, va=500.0),),
    )
    assert calc.update_panel(moved) == compute_project(replace_panel(calc.project, moved))


def test_update_panel_with_a_prechecked_project(project) -> None:
    # The web service checks the panel and builds the new project itself, then hands both over.
    calc = Calculator(project)
    lp2 = project.panel("LP-2")
    assert lp2 is not None
    edited = replace(lp2, circuits=(replace(lp2.circuits[0], va=4_321.0), *lp2.circuits[1:]))
    new_project = replace_panel(project, edited)
    assert calc.update_panel(edited, checked_project=new_project) == compute_project(new_project)
    assert calc.project is new_project
    # A project that does not hold this very panel is a programming error, refused before anything changes.
    other = replace(edited, circuits=(replace(lp2.circuits[0], va=1.0), *lp2.circuits[1:]))
    with pytest.raises(ValueError):
        calc.update_panel(other, checked_project=new_project)
    assert calc.project is new_project


def test_update_panel_leaves_earlier_results_unchanged(project) -> None:
    # A result handed out before an edit (an older snapshot) keeps its values; the new result lists
    # the elements in the project's order, as a full compute does.
    calc = Calculator(project)
    before = calc.result()
    before_json = json.dumps(before.to_json())
    lp2 = project.panel("LP-2")
    assert lp2 is not None
    edited = replace(lp2, circuits=(replace(lp2.circuits[0], va=9_000.0), *lp2.circuits[1:]))
    after = calc.update_panel(edited)
    assert json.dumps(before.to_json()) == before_json
    assert after.panels["LP-2"] != before.panels["LP-2"]
    assert list(after.panels) == [p.tag for p in project.panels]
    assert list(after.transformers) == [t.tag for t in project.transformers]


def _xf_project(transformer: dict, panel_circuits: list[dict], *, feed_poles: int = 2, feed_slot: int = 1) -> dict:
    return {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "Transformer checks (invented)"},
        "sources": [{"tag": "S", "system": "480Y/277 3PH 4W"}],
        "transformers": [{"tag": "X", "feeder": {"length_ft": 0}, **transformer}],
        "panels": [
            {
                "tag": "DP",
                "system": "480Y/277 3PH 4W",
                "fed_from": "S",
                "feeder": {"length_ft": 0},
                "circuits": [{"slot": feed_slot, "poles": feed_poles, "feeds": "X", "breaker_amps": 100}],
            },
            {"tag": "SP", "system": transformer["secondary"], "fed_from": "X", "circuits": panel_circuits},
        ],
    }


def test_single_phase_transformer_fault_and_reflection() -> None:
    # 50 kVA 480 V – 120/240 V, 2.5 %Z, infinite source, no primary feeder:
    # FLA_sec = 50 000 / 240 = 208.3 A; fault = 208.3 × 100 / 2.5 = 8.333 kA (common practice).
    data = _xf_project(
        {"kva": 50, "primary": "480Y/277 3PH 4W", "secondary": "120/240 1PH 3W", "impedance_pct": 2.5},
        [{"slot": 1, "poles": 2, "va": 24000, "pf": 1.0}, {"slot": 4, "poles": 1, "va": 2400, "pf": 1.0}],
    )
    res = compute_project(loads_project(json.dumps(data)))
    t = res.transformers["X"]
    assert_close(t.fla_secondary, 50_000 / 240)
    assert_close(t.fla_primary, 50_000 / 480)
    assert_close(t.secondary_fault_ka, 50_000 / 240 * 100 / 2.5 / 1000)
    # Primary: 24 kVA across 240 V → 100 A secondary → 50 A on 480 V lines A and B; the 2.4 kVA
    # 120 V load on B is half of the winding: 20 A × 120/480 = 5 A more (opposite phase of B → adds).
    assert set(k for k, v in t.primary_line_amps.items() if v > 0) == {"A", "B"}
    assert_close(t.primary_line_amps["A"], (24_000 + 2_400) / 480, rel=0.002)
    dp = res.panels["DP"]
    assert dp.neutral_amps is not None and dp.neutral_amps < 1e-9  # line to line on the primary
    assert dp.connected_va == pytest.approx({"A": 13_200.0, "B": 13_200.0, "C": 0.0})  # balanced over the 2 poles


def test_wye_wye_passes_neutral_current_and_triplens_to_the_primary() -> None:
    data = _xf_project(
        {"kva": 75, "primary": "480Y/277 3PH 4W", "secondary": "208Y/120 3PH 4W"},
        [{"slot": 1, "va": 12000, "pf": 1.0, "harmonic3_pct": 50}],
        feed_poles=3,
    )
    res = compute_project(loads_project(json.dumps(data)))
    # 100 A on secondary phase A, n = 277/120: 43.3 A fundamental on primary A and its neutral;
    # 50 % third harmonic: 21.7 A → I_N = √(43.3² + 21.7²) = 48.4 A (zero sequence passes a grounded wye–wye).
    i1 = 100 * 120 / 277
    assert_close(res.panels["DP"].neutral_amps, math.hypot(i1, i1 / 2), rel=0.002)
    assert_close(res.panels["SP"].neutral_amps, math.hypot(100, 50), rel=0.002)
    assert res.transformers["X"].k_factor_suggested is not None  # K = (1 + 9·0.25)/(1 + 0.25) = 2.6 → K-4
    # The same load behind a delta primary: nothing on the 480 V neutral.
    data["transformers"][0]["primary"] = "480 3PH 3W"
    res = compute_project(loads_project(json.dumps(data)))
    assert res.panels["DP"].neutral_amps < 1e-9


def test_neutral_overload_warning() -> None:
    data = {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "Neutral (invented)"},
        "sources": [{"tag": "S", "system": "208Y/120 3PH 4W"}],
        "panels": [
            {
                "tag": "NP",
                "system": "208Y/120 3PH 4W",
                "fed_from": "S",
                "feeder": {"length_ft": 10, "size": "4", "neutral_size": "10"},
                "circuits": [{"slot": 1, "va": 7200, "pf": 1.0, "breaker_amps": 70}],
            }
        ],
    }
    res = compute_project(loads_project(json.dumps(data)))
    # 60 A returns on a 10 AWG neutral (35 A at 75 °C, NFPA 70-2023 Table 310.16, from memory).
    assert_close(res.panels["NP"].neutral_amps, 60.0)
    assert "neutral-overload" in _codes(res.panels["NP"])


def test_single_phase_transformer_whose_primary_string_is_single_phase() -> None:
    # A 120/240 V primary string on a 240 V delta panel, fed from lines B–C: the winding sits
    # across B–C of the panel (the string states only its voltage): 4.8 kVA → 20 A on B and C.
    data = {
        "format": "panelwright.project",
        "version": 1,
        "project": {"name": "1-phase primary (invented)"},
        "sources": [{"tag": "S", "system": "240 3PH 3W"}],
        "transformers": [{"tag": "X", "kva": 10, "primary": "120/240 1PH 3W", "secondary": "120 1PH 2W"}],
        "panels": [
            {"tag": "D", "system": "240 3PH 3W", "fed_from": "S", "circuits": [{"slot": 3, "poles": 2, "feeds": "X"}]},
            {"tag": "Q", "system": "120 1PH 2W", "fed_from": "X", "circuits": [{"slot": 1, "va": 4800, "pf": 1.0}]},
        ],
    }
    res = compute_project(loads_project(json.dumps(data)))
    amps = res.panels["D"].line_amps
    assert amps["A"] < 1e-9
    assert_close(amps["B"], 20.0)
    assert_close(amps["C"], 20.0)


def test_transformer_primary_feeders_carry_a_neutral_only_when_it_returns_current() -> None:
    def neutral_of(primary: str, secondary: str, poles: int) -> str | None:
        data = _xf_project({"kva": 45, "primary": primary, "secondary": secondary}, [], feed_poles=poles)
        feeder = compute_project(loads_project(json.dumps(data))).transformers["X"].feeder
        assert feeder is not None
        return feeder.neutral

    assert neutral_of("480 3PH 3W", "208Y/120 3PH 4W", 3) is None  # delta primary
    assert neutral_of("480Y/277 3PH 4W", "240 3PH 3W", 3) is None  # wye primary, floating star
    assert neutral_of("480Y/277 3PH 4W", "208Y/120 3PH 4W", 3) is not None  # grounded wye–wye
    assert neutral_of("480Y/277 3PH 4W", "120/240 1PH 3W", 2) is None  # line to line


def test_main_overload_feeder_ampacity_and_feeder_ocpd_warnings(project) -> None:
    data = json.loads(DATA.read_text())
    lp1 = data["panels"][1]
    lp1["main_amps"] = 100  # design 128.6 A
    lp1["circuits"][-1]["breaker_amps"] = 50  # feeds LP-2 (design 60.4 A)
    lp2 = data["panels"][2]
    lp2["bus_amps"] = 225
    lp2["feeder"] = {"length_ft": 40, "size": "8"}  # 50 A at 75 °C Cu (NFPA 70-2023 Table 310.16, from memory)
    res = compute_project(loads_project(json.dumps(data)))
    assert "main-overload" in _codes(res.panels["LP-1"])
    codes = _codes(res.panels["LP-2"])
    assert {"feeder-ampacity", "feeder-ocpd", "conductor-too-small"} <= codes
    msg = next(w.message for w in res.panels["LP-2"].warnings if w.code == WarningCode.FEEDER_AMPACITY)
    assert "LP-2" in msg and "60.4" in msg


def test_secondary_fault_includes_source_level_and_primary_feeder() -> None:
    data = json.loads(DATA.read_text())
    infinite = compute_project(loads_project(json.dumps(data))).transformers["T1"].secondary_fault_ka
    data["transformers"][0]["feeder"] = {"length_ft": 300, "size": "1"}
    with_feeder = compute_project(loads_project(json.dumps(data))).transformers["T1"].secondary_fault_ka
    data["sources"][0]["fault_ka"] = 10
    data["sources"][0]["x_over_r"] = 6
    with_source = compute_project(loads_project(json.dumps(data))).transformers["T1"].secondary_fault_ka
    assert with_source < with_feeder < infinite
    # Ohmic check of the feeder step: Z_T + Z_feeder referred by (208/480)² (IEEE Std 141 ohmic method).
    from server.calc.faults import bolted_fault_ka, transformer_impedance
    from server.calc.systems import SYSTEMS
    from server.calc.voltage_drop import feeder_impedance_ohm

    z = (
        transformer_impedance(75, 5.0, 4.0, 208.0, True)
        + feeder_impedance_ohm("1", "Cu", "steel", 300, 1) * (208.0 / 480.0) ** 2
    )
    assert_close(with_feeder, bolted_fault_ka(z, SYSTEMS["208Y/120 3PH 4W"]))


# --------------------------------------------------------------------------- feeder rotation
#
# Hand checks (common practice: a cyclic landing A→B, B→C, C→A relabels phases and keeps the
# sequence).  208Y/120: V_A = 120∠0°, V_B = 120∠−120°, V_C = 120∠120°.


def _rotation_project(circuits: tuple[Circuit, ...], rotation: int) -> Project:
    return Project(
        ProjectInfo(name="rotation hand check (invented)"),
        sources=(Source("S", "208Y/120 3PH 4W"),),
        panels=(
            Panel(
                "D",
                "208Y/120 3PH 4W",
                fed_from="S",
                circuits=(Circuit(slot=1, poles=3, feeds="P"), Circuit(slot=2, poles=1, va=2_000, pf=1.0)),
            ),
            Panel("P", "208Y/120 3PH 4W", circuits=circuits, feeder_rotation=rotation),
        ),
    )


@pytest.mark.parametrize("rotation", [1, 2])
def test_one_kva_on_panel_phase_a_lands_on_the_rotated_upstream_phase(rotation) -> None:
    # P: 1 000 VA, unity pf, on its own phase A (slot 1).  D: 2 000 VA on its own phase A (slot 2).
    # r=1: P's A lands on D's B → D: A 2 000, B 1 000, C 0 VA; I_B = 1 000/120 = 8.333 A.
    # r=2: P's A lands on D's C → D: A 2 000, B 0, C 1 000 VA.
    res = compute_project(_rotation_project((Circuit(slot=1, poles=1, va=1_000, pf=1.0),), rotation))
    landed = "B" if rotation == 1 else "C"
    other = "C" if rotation == 1 else "B"
    d, p = res.panels["D"], res.panels["P"]
    assert p.connected_va == {"A": 1_000.0, "B": 0.0, "C": 0.0}  # the panel's own results keep its labels
    assert_close(p.line_amps["A"], 1_000 / 120)
    assert d.connected_va == {"A": 2_000.0, landed: 1_000.0, other: 0.0}
    assert_close(d.line_amps[landed], 1_000 / 120)
    assert_close(d.line_amps["A"], 2_000 / 120)
    assert_close(d.line_amps[other], 0.0, abs_=1e-9)
    # Neutral: |16.667∠0° + 8.333∠∓120°| = √(16.667² + 8.333² − 16.667·8.333) = 14.434 A either way.
    assert_close(d.neutral_amps, math.sqrt(16.667**2 + 8.333**2 - 16.667 * 8.333), rel=1e-3)
    # The feeding breaker on D shows the relabelled phase VA.
    breaker = next(c for c in d.circuits if c.slot == 1)
    assert breaker.phase_va == {"A": 0.0, landed: 1_000.0, other: 0.0}
    assert res.sources["S"].connected_va == 3_000.0


@pytest.mark.parametrize("rotation", [0, 1, 2])
def test_balanced_three_loads_stay_balanced_whatever_the_landing(rotation) -> None:
    # Three 3 000 VA unity-pf loads, one per phase: 25 A per line and no neutral current, rotated or not.
    loads = tuple(Circuit(slot=s, poles=1, va=3_000, pf=1.0) for s in (1, 3, 5))
    project = _rotation_project(loads, rotation)
    project = replace(
        project, panels=(replace(project.panels[0], circuits=project.panels[0].circuits[:1]), project.panels[1])
    )
    d = compute_project(project).panels["D"]
    assert d.connected_va == {"A": 3_000.0, "B": 3_000.0, "C": 3_000.0}
    for phase in "ABC":
        assert_close(d.line_amps[phase], 25.0)
    assert_close(d.neutral_amps, 0.0, abs_=1e-9)


def test_rotation_turns_the_fundamental_phasor_not_just_the_label() -> None:
    # P: 1 200 VA at pf 0.8 on its A; D: 1 200 VA at unity on its B (slot 4: row 2 = B).  With r=1
    # both sit on D's B: I = 10∠(−120° − 36.87°) + 10∠−120° → |I_B| = 2·10·cos(18.435°) = 18.974 A.
    # A relabel without the turn would add 10∠−36.87° to 10∠−120° (15.4 A), a different number.
    project = _rotation_project((Circuit(slot=1, poles=1, va=1_200, pf=0.8),), 1)
    d_panel = replace(
        project.panels[0], circuits=(Circuit(slot=1, poles=3, feeds="P"), Circuit(slot=4, poles=1, va=1_200, pf=1.0))
    )
    d = compute_project(replace(project, panels=(d_panel, project.panels[1]))).panels["D"]
    assert_close(d.line_amps["B"], 20 * math.cos(math.radians(36.87 / 2)), rel=1e-4)


def test_incremental_update_of_a_landing_equals_a_full_compute() -> None:
    project = _rotation_project((Circuit(slot=1, poles=1, va=1_000, pf=0.8), Circuit(slot=4, poles=2, va=3_000)), 0)
    calc = Calculator(project)
    for rotation in (1, 2, 0):
        panel = replace(project.panel("P"), feeder_rotation=rotation)
        project = replace_panel(project, panel)
        assert calc.update_panel(panel) == compute_project(project)


def test_sources_carry_no_warnings_of_their_own() -> None:
    # The screens rely on this (a source's badge shows no warnings without scanning the project's).
    from seed_demo import DEMO_FILE
    from server.calc.projectfile import load_project_file
    from tests.benchmarks.generate import generate_project

    for project in (load_project_file(DEMO_FILE), generate_project()):
        result = compute_project(project)
        sources = {s.tag for s in project.sources}
        assert result.warnings and not [w for w in result.warnings if w.tag in sources]


def test_incremental_updates_follow_the_cumulative_drop_warning_on_and_off() -> None:
    # The top-down pass keeps a node's warnings when nothing they depend on moved; a growing load
    # that pushes the cumulative drop over the limit (and back) must still match a full compute.
    from seed_demo import DEMO_FILE
    from server.calc.projectfile import load_project_file

    project = load_project_file(DEMO_FILE)
    lp1 = project.panel("LP-1")
    assert lp1 is not None
    long_run = replace(lp1, feeder=replace(lp1.feeder, length_ft=250.0, size="250"))  # given size: no upsizing
    project = replace_panel(project, long_run)
    calc = Calculator(project)
    load = next(c for c in long_run.circuits if c.feeds is None and c.poles == 1 and c.va)
    seen: set[tuple[bool, ...]] = set()
    for va in (500.0, 12_000.0, 30_000.0, 60_000.0, 500.0, 60_000.0, 500.0):
        panel = calc.project.panel("LP-1")
        assert panel is not None
        panel = replace(panel, circuits=tuple(replace(c, va=va) if c.slot == load.slot else c for c in panel.circuits))
        inc = calc.update_panel(panel)
        assert inc == compute_project(calc.project)
        # LP-1K hangs below LP-1: its own result is unchanged, only the drop upstream of it moves.
        seen.add(
            tuple(
                any(w.code == WarningCode.VOLTAGE_DROP_TOTAL and w.tag == t for w in inc.warnings)
                for t in ("LP-1", "LP-1K")
            )
        )
    assert {(True, True), (False, False)} <= seen  # the warning came and went, below as well
