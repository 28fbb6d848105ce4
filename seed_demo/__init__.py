"""The demo project: an invented light-industrial unit with an office wing.

Millbrook Fabrication Hall (project 26-041) is a made-up scenario for demonstrations and tests:
a 480Y/277 V service, a main distribution panel, two 480–208Y/120 V transformers (office wing
and fabrication floor), a single-phase 480–120/240 V transformer for a site building, a
480–240/120 V centre-tapped delta transformer for a maintenance workshop, and seven panels.
Every name, address and value in it is invented.  The file is the canonical version-1 form
(``dump_project(parse_project(file)) == file``), so loading it is deterministic.
"""

from __future__ import annotations

from pathlib import Path

DEMO_FILE = Path(__file__).resolve().parent / "demo_project.json"
DEMO_NUMBER = "26-041"
