"""Writing a confirmed import: replace the circuits of the imported panels in one transaction.

``server.services`` has no operation that replaces a panel's whole circuit list, so this small
one lives here and uses the store's own pieces: the optimistic lock
(:func:`server.repo.projects.bump_data_version`: the write happens only if the project is still
at the version the preview was validated against), the ORM :class:`server.db.models.Circuit`
and :func:`server.services.circuit_raw` for the column values.  If anyone changed the project
after the preview, nothing is written and the user previews again.
"""

from __future__ import annotations

from collections.abc import Mapping

from sqlalchemy import delete, select

from server.calc.model import Circuit
from server.db import models as db
from server.repo import projects as repo
from server.services import Conflict, NotFound, Services, circuit_raw


def replace_panel_circuits(
    services: Services,
    project_id: int,
    circuits_by_panel: Mapping[str, tuple[Circuit, ...]],
    *,
    expected_version: int,
) -> int:
    """Replace each named panel's circuits; returns the project's new ``data_version``.

    Raises :class:`~server.services.Conflict` when the project moved on since ``expected_version``
    and :class:`~server.services.NotFound` when a panel is gone.  Either way nothing is written.
    """
    with services.sessions() as s, s.begin():
        if not repo.bump_data_version(s, project_id=project_id, expected=expected_version):
            raise Conflict("the project changed after this import was previewed; nothing was written. Preview it again")
        for tag, circuits in circuits_by_panel.items():
            panel_id = s.scalar(select(db.Panel.id).where(db.Panel.project_id == project_id, db.Panel.tag == tag))
            if panel_id is None:
                raise NotFound(f"project {project_id} has no panel {tag}")
            s.execute(delete(db.Circuit).where(db.Circuit.panel_id == panel_id))
            s.flush()
            for c in circuits:
                s.add(db.Circuit(panel_id=panel_id, version=1, **circuit_raw(c)))
    services.cache.drop(project_id)
    return expected_version + 1
