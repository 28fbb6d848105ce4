"""The project model's lookups by tag (server.calc.model.Project)."""

from __future__ import annotations

from dataclasses import replace

from server.calc.model import Panel, Project, ProjectInfo, Source, Transformer


def _project() -> Project:
    return Project(
        ProjectInfo(name="Lookup check"),
        sources=(Source("S1", "480Y/277"),),
        transformers=(Transformer("T1", 75.0, "480Y/277", "208Y/120", fed_from="MDP"),),
        panels=(Panel("MDP", "480Y/277", fed_from="S1"), Panel("LP1", "208Y/120", fed_from="T1")),
    )


def test_lookups_find_each_kind_by_tag() -> None:
    p = _project()
    assert p.source("S1") is p.sources[0]
    assert p.transformer("T1") is p.transformers[0]
    assert p.panel("LP1") is p.panels[1]
    # A tag of another kind is not found under the wrong kind.
    assert p.panel("T1") is None and p.transformer("LP1") is None and p.source("MDP") is None
    assert p.panel("nowhere") is None


def test_a_replaced_project_looks_up_its_own_elements() -> None:
    p = _project()
    assert p.panel("LP1") is not None  # builds the first project's index
    new_lp1 = Panel("LP1", "208Y/120", fed_from="T1", bus_amps=400)
    q = replace(p, panels=(p.panels[0], new_lp1))
    assert q.panel("LP1") is new_lp1
    assert p.panel("LP1") is p.panels[1]  # the earlier project is unchanged
    assert q != p and replace(q) == q


def test_a_repeated_tag_finds_the_first_as_a_scan_would() -> None:
    # Only an unvalidated file can repeat a tag (parse_project refuses it); lookups stay predictable.
    first, second = Panel("LP1", "208Y/120"), Panel("LP1", "480Y/277")
    p = Project(ProjectInfo(name="Repeat"), panels=(first, second))
    assert p.panel("LP1") is first


def test_with_panel_keeps_lookups_right() -> None:
    p = _project()
    new_lp1 = Panel("LP1", "208Y/120", fed_from="T1", spaces=30)
    for warm in (False, True):  # with and without the first project's index already built
        base = _project()
        if warm:
            assert base.panel("MDP") is base.panels[0]
        q = base.with_panel(new_lp1)
        assert q.panels == (base.panels[0], new_lp1)
        assert q.panel("LP1") is new_lp1 and q.panel("MDP") is base.panels[0]
        assert q.transformer("T1") is base.transformers[0] and q.source("S1") is base.sources[0]
        assert base.panel("LP1") is base.panels[1]
        assert q == replace(p, panels=(p.panels[0], new_lp1))


def test_with_panel_on_a_repeated_tag_replaces_every_copy() -> None:
    first, second = Panel("LP1", "208Y/120"), Panel("LP1", "480Y/277")
    p = Project(ProjectInfo(name="Repeat"), panels=(first, Panel("MDP", "480Y/277"), second))
    assert p.panel("MDP") is not None  # index built; positions are not trusted with a repeated tag
    new = Panel("LP1", "208Y/120", spaces=12)
    q = p.with_panel(new)
    assert q.panels == (new, p.panels[1], new)


def test_with_panel_keeps_order_at_every_position() -> None:
    panels = tuple(Panel(f"P{i}", "208Y/120") for i in range(5))
    p = Project(ProjectInfo(name="Order"), panels=panels)
    p.panel("P0")
    for i in range(5):
        new = Panel(f"P{i}", "208Y/120", spaces=30)
        q = p.with_panel(new)
        assert q.panels == (*panels[:i], new, *panels[i + 1 :])
        assert q.with_panel(panels[i]).panels == panels  # the carried index still finds the position
