"""server.versions: a whole form's content version is the same whether read from the model or the file."""

from __future__ import annotations

from dataclasses import replace

from seed_demo import DEMO_FILE
from server import versions
from server.calc.projectfile import dump_project, load_project_file


def test_model_and_canonical_file_give_the_same_version() -> None:
    project = load_project_file(DEMO_FILE)
    three_phase = next(p for p in project.panels if p.system.startswith("208Y/120") and p.fed_from)
    project = project.with_panel(replace(three_phase, feeder_rotation=2))  # one panel written with the field
    data = dump_project(project)
    assert any("feeder_rotation" in p for p in data["panels"]) and any(
        "feeder_rotation" not in p for p in data["panels"]
    )
    for panel, plain in zip(project.panels, data["panels"], strict=True):
        assert versions.content_version(panel) == versions.of_plain(plain), panel.tag
    for t, plain in zip(project.transformers, data["transformers"], strict=True):
        assert versions.content_version(t) == versions.of_plain(plain), t.tag
    assert versions.content_version(project.project) == versions.of_plain(data["project"])


def test_any_change_changes_the_version() -> None:
    panel = load_project_file(DEMO_FILE).panels[0]
    v = versions.content_version(panel)
    assert versions.content_version(replace(panel, description=panel.description + " x")) != v
    assert versions.content_version(replace(panel, feeder_rotation=1)) != v
    # The circuits are versioned row by row, not by the header's form.
    assert versions.content_version(replace(panel, circuits=panel.circuits[:-1])) == v
