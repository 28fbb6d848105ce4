"""The service layer: database rows ↔ the version-1 project model ↔ calculation results.

Every write follows one path: build the would-be project (as the version-1 file, or one circuit
row), validate it with :mod:`server.calc.projectfile` (the same rules as import, the API and
the CLI), and only then write, in one transaction.  Nothing partial is ever stored: a rejected
edit raises :class:`EditRejected` carrying the problems keyed by field and the values the user
typed.

Results come from :mod:`server.calc.engine`.  An in-process :class:`CalcCache` keeps one engine
``Calculator`` per recently used project, keyed by the project's ``data_version`` (bumped on
every write, by this process or any other); a circuit edit then recomputes incrementally with
``Calculator.update_panel`` instead of the whole project.  Edits use the version as an
optimistic lock: the write succeeds only if nobody else wrote since the model was read.
"""

from __future__ import annotations

import copy
import hashlib
import json
import threading
from collections import OrderedDict
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field, fields, replace
from typing import Any

from sqlalchemy import select, update
from sqlalchemy.orm import Session, sessionmaker

from server.calc import projectfile as pf
from server.calc.engine import Calculator
from server.calc.errors import Problem, ProjectFileError
from server.calc.model import FORMAT_NAME, FORMAT_VERSION, Circuit, Feeder, Panel, Project, ProjectInfo, Source
from server.calc.model import Transformer as TransformerModel
from server.calc.results import ProjectResult
from server.config import Settings
from server.db import models as db
from server.db.migrate import ensure_migrated
from server.db.session import make_engine, make_sessionmaker
from server.repo import metered as metered_repo
from server.repo import projects as repo

# --------------------------------------------------------------------------- errors


class ServiceError(Exception):
    """Base of the errors a user can cause; each has a message fit to show."""


class NotFound(ServiceError):
    """The project, element or circuit does not exist (or no longer does)."""


class Conflict(ServiceError):
    """Someone else changed the project between reading and writing, several times running."""


class StaleProject(Conflict):
    """A whole-project write named a ``data_version`` that is no longer the stored one; nothing was written."""

    def __init__(self, project_id: int, expected: int, current: int) -> None:
        self.expected, self.current = expected, current
        super().__init__(
            f"project {project_id} is at version {current}, not {expected} as your request says "
            "(someone saved it meanwhile); nothing was written. GET it again, re-apply your change and PUT it "
            "with the new ETag."
        )


class StaleEdit(Conflict):
    """The edit was based on an older version of the row than the one stored now; nothing was written.

    Carries what is stored now (``current``, its ``version`` and who changed it last) and what
    the user typed (``typed``), so the editor can show both and let the user choose.
    """

    def __init__(
        self, target: str, current: dict[str, Any], version: int, changed_by: str, typed: Mapping[str, Any]
    ) -> None:
        self.target, self.current, self.version, self.changed_by = target, current, version, changed_by
        self.typed = dict(typed)
        super().__init__(
            f"{target} was changed by {changed_by} while you were editing; nothing was saved. "
            "Reload to see their values, then make your change again."
        )

    @classmethod
    def of(cls, s: Session, project_id: int, tag: str, row: db.Circuit, typed: Mapping[str, Any]) -> StaleEdit:
        target = f"{tag} circuit {row.slot}"
        who = s.scalar(
            select(db.AuditEvent.user_name)
            .where(db.AuditEvent.project_id == project_id, db.AuditEvent.target == target)
            .order_by(db.AuditEvent.id.desc())
            .limit(1)
        )
        return cls(f"Circuit {row.slot} of {tag}", circuit_dict(row), row.version, who or "someone else", typed)


class EditRejected(ServiceError):
    """The edit breaks a rule of the project file; nothing was written."""

    def __init__(self, problems: list[Problem], values: Mapping[str, Any] | None = None) -> None:
        self.problems = list(problems)
        self.values = dict(values or {})
        super().__init__("; ".join(p.describe() for p in self.problems))

    def by_field(self) -> dict[str, str]:
        """Messages keyed by field name (``""`` for problems not tied to a field)."""
        out: dict[str, str] = {}
        for p in self.problems:
            key = p.field or ""
            out[key] = f"{out[key]}; {p.message}" if key in out else p.message
        return out


# --------------------------------------------------------------------------- rows → file

#: Model field → column name where they differ.
_COLUMN = {"primary": "primary_system", "secondary": "secondary_system"}
_FEEDER_FIELDS = tuple(f.name for f in fields(Feeder))
_INFO_FIELDS = tuple(f.name for f in fields(ProjectInfo))
_SOURCE_FIELDS = tuple(f.name for f in fields(Source))
_TRANSFORMER_FIELDS = tuple(f.name for f in fields(TransformerModel) if f.name != "feeder")
_PANEL_FIELDS = tuple(f.name for f in fields(Panel) if f.name not in ("feeder", "circuits"))
_CIRCUIT_FIELDS = tuple(f.name for f in fields(Circuit))


def _row_dict(row: Any, names: tuple[str, ...]) -> dict[str, Any]:
    return {n: getattr(row, _COLUMN.get(n, n)) for n in names}


def _feeder_dict(row: Any) -> dict[str, Any]:
    return {n: getattr(row, f"feeder_{n}") for n in _FEEDER_FIELDS}


def circuit_dict(row: db.Circuit) -> dict[str, Any]:
    return _row_dict(row, _CIRCUIT_FIELDS)


def project_file(row: db.Project) -> dict[str, Any]:
    """The version-1 project file of a project's rows (before validation)."""
    panels = []
    for p in row.panels:
        d = _row_dict(p, _PANEL_FIELDS)
        d["feeder"] = _feeder_dict(p)
        d["circuits"] = [circuit_dict(c) for c in p.circuits]
        panels.append(d)
    transformers = []
    for t in row.transformers:
        d = _row_dict(t, _TRANSFORMER_FIELDS)
        d["feeder"] = _feeder_dict(t)
        transformers.append(d)
    return {
        "format": FORMAT_NAME,
        "version": FORMAT_VERSION,
        "project": _row_dict(row, _INFO_FIELDS),
        "sources": [_row_dict(s, _SOURCE_FIELDS) for s in row.sources],
        "transformers": transformers,
        "panels": panels,
    }


# --------------------------------------------------------------------------- model → rows


def circuit_raw(c: Circuit) -> dict[str, Any]:
    """A circuit as a project-file row (enumerations as their strings)."""
    return {n: getattr(getattr(c, n), "value", getattr(c, n)) for n in _CIRCUIT_FIELDS}


def _set(row: Any, name: str, value: Any) -> bool:
    col = _COLUMN.get(name, name)
    value = getattr(value, "value", value)  # StrEnum → its string
    if getattr(row, col) != value:
        setattr(row, col, value)
        return True
    return False


def _set_feeder(row: Any, feeder: Feeder) -> None:
    for n in _FEEDER_FIELDS:
        _set(row, f"feeder_{n}", getattr(feeder, n))


def _apply_circuit(row: db.Circuit, c: Circuit) -> None:
    changed = False
    for n in _CIRCUIT_FIELDS:
        changed |= _set(row, n, getattr(c, n))
    if changed and row.id is not None:
        row.version = (row.version or 0) + 1


def _sync_project(session: Session, row: db.Project, model: Project) -> None:
    """Make the rows of ``row`` hold exactly ``model`` (update in place, insert, delete by tag/slot)."""
    for n in _INFO_FIELDS:
        _set(row, n, getattr(model.project, n))

    row.sources = _sync_by_tag(
        session, row.sources, model.sources, lambda e: db.Source(project=row, tag=e.tag), _SOURCE_FIELDS
    )
    row.transformers = _sync_by_tag(
        session,
        row.transformers,
        model.transformers,
        lambda e: db.Transformer(project=row, tag=e.tag),
        _TRANSFORMER_FIELDS,
        lambda r, t: _set_feeder(r, t.feeder),
    )
    row.panels = _sync_by_tag(
        session,
        row.panels,
        model.panels,
        lambda e: db.Panel(project=row, tag=e.tag),
        _PANEL_FIELDS,
        lambda r, p: _sync_panel_rows(session, r, p),
    )


def _sync_by_tag(
    session: Session,
    rows: list[Any],
    elements: tuple[Any, ...],
    make: Any,
    names: tuple[str, ...],
    extra: Any = None,
) -> list[Any]:
    """Rows matching ``elements`` by tag, in model order: updated in place, made, or deleted."""
    by_tag = {r.tag: r for r in rows}
    keep: list[Any] = []
    for i, e in enumerate(elements):
        r = by_tag.pop(e.tag, None) or make(e)
        r.position = i
        for n in names:
            _set(r, n, getattr(e, n))
        if extra is not None:
            extra(r, e)
        keep.append(r)
    for r in by_tag.values():
        session.delete(r)
    return keep


def _sync_panel_rows(session: Session, r: db.Panel, p: Panel) -> None:
    """A panel's feeder columns and its circuits (matched by slot; a changed circuit's version bumps)."""
    _set_feeder(r, p.feeder)
    by_slot = {c.slot: c for c in r.circuits}
    ckeep: list[db.Circuit] = []
    for c in p.circuits:
        cr = by_slot.pop(c.slot, None) or db.Circuit(panel=r, slot=c.slot, version=1)
        _apply_circuit(cr, c)
        ckeep.append(cr)
    for cr in by_slot.values():
        session.delete(cr)
    r.circuits = ckeep


# --------------------------------------------------------------------------- cache


@dataclass
class _Entry:
    data_version: int
    model: Project
    calculator: Calculator
    result: ProjectResult
    versions: dict[str, dict[int, int]] = field(default_factory=dict)  # panel tag → slot → Circuit.version
    archived: bool = False


class CalcCache:
    """Least-recently-used map: project id → (data_version, model, engine Calculator, result)."""

    def __init__(self, size: int) -> None:
        self.size = size
        self._entries: OrderedDict[int, _Entry] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, project_id: int, data_version: int) -> _Entry | None:
        with self._lock:
            entry = self._entries.get(project_id)
            if entry is None or entry.data_version != data_version:
                return None
            self._entries.move_to_end(project_id)
            return entry

    def peek(self, project_id: int) -> _Entry | None:
        """The cached entry whatever its version (the caller's write checks the version in the database)."""
        with self._lock:
            return self._entries.get(project_id)

    def put(self, project_id: int, entry: _Entry) -> None:
        if self.size <= 0:
            return
        with self._lock:
            self._entries[project_id] = entry
            self._entries.move_to_end(project_id)
            while len(self._entries) > self.size:
                self._entries.popitem(last=False)

    def drop(self, project_id: int) -> None:
        with self._lock:
            self._entries.pop(project_id, None)


# --------------------------------------------------------------------------- snapshots


@dataclass(frozen=True)
class Snapshot:
    """A project as read at one ``data_version``: its model and its results."""

    project_id: int
    data_version: int
    archived: bool
    model: Project
    result: ProjectResult
    #: panel tag → slot → ``Circuit.version``: the editor sends it back so a stale edit is refused.
    circuit_versions: Mapping[str, Mapping[int, int]] = field(default_factory=dict)

    @property
    def info(self) -> ProjectInfo:
        return self.model.project


@dataclass(frozen=True)
class ProjectSummary:
    """One line of the project list."""

    id: int
    number: str
    name: str
    client: str
    code: str
    archived: bool
    updated_at: Any
    panel_count: int = 0


@dataclass(frozen=True)
class ImportOutcome:
    project_id: int
    replaced: bool


@dataclass
class _Locks:
    """One lock per project so edits of one project in this process run one at a time.

    Re-entrant: a writer holding it reads its own result through :meth:`Services.snapshot`,
    which takes it on a cache miss (see there).
    """

    locks: dict[int, threading.RLock] = field(default_factory=dict)
    guard: threading.Lock = field(default_factory=threading.Lock)

    def of(self, project_id: int) -> threading.RLock:
        with self.guard:
            return self.locks.setdefault(project_id, threading.RLock())


def blank_to_none(form: Mapping[str, Any]) -> dict[str, Any]:
    """Form values as the project file wants them: an empty box means "not given"."""
    out: dict[str, Any] = {}
    for k, v in form.items():
        if isinstance(v, str):
            v = v.strip()
            out[k] = v if v != "" else None
        else:
            out[k] = v
    return out


#: Circuit fields a user edits in the panel editor (``feeds`` changes only through the tree).
CIRCUIT_FORM_FIELDS = ("description", "category", "poles", "va", "pf", "continuous", "breaker_amps", "status", "notes")
PANEL_FORM_FIELDS = (
    "description",
    "bus_amps",
    "main_amps",
    "spaces",
    "sccr_ka",
    "location",
    "mounting",
    "feeder_rotation",
)
FEEDER_FORM_FIELDS = ("length_ft", "material", "conduit", "sets", "size", "ocpd_amps", "insulation_c", "ambient_c")
TRANSFORMER_FORM_FIELDS = (
    "kva",
    "primary",
    "secondary",
    "impedance_pct",
    "x_over_r",
    "loss_pct",
    "k_factor",
    "description",
    "location",
)
PROJECT_FORM_FIELDS = tuple(n for n in _INFO_FIELDS)


class Services:
    """The operations of the app, each in its own transaction.  Built from a sessionmaker."""

    def __init__(self, sessions: sessionmaker[Session], *, cache_size: int = 8) -> None:
        self.sessions = sessions
        self.cache = CalcCache(cache_size)
        self._locks = _Locks()
        from server import audit, revisions  # every write is audited; issued revisions refuse updates

        audit.install(sessions)
        revisions.install_guard(sessions)

    @classmethod
    def from_settings(cls, settings: Settings) -> Services:
        """Services on ``settings.database_url``; raises DatabaseNotMigrated unless the schema is current."""
        engine = make_engine(settings)
        ensure_migrated(engine)
        return cls(make_sessionmaker(engine), cache_size=settings.calc_cache_size)

    @contextmanager
    def _tx(self) -> Iterator[Session]:
        with self.sessions() as s, s.begin():
            yield s

    # ----------------------------------------------------------------- reading

    def list_projects(self, *, include_archived: bool = False) -> list[ProjectSummary]:
        with self.sessions() as s:
            rows = repo.list_projects(s, include_archived=include_archived)
            return [ProjectSummary(r.id, r.number, r.name, r.client, r.code, r.archived, r.updated_at) for r in rows]

    def find_project_id(self, key: str) -> int:
        with self.sessions() as s:
            row = repo.find_project(s, key=key)
            if row is None:
                raise NotFound(f"no project with number or id {key!r}")
            return row.id

    def snapshot(self, project_id: int) -> Snapshot:
        """The project's model and results at its current version (from the cache when fresh)."""
        with self.sessions() as s:
            state = s.execute(
                select(db.Project.data_version, db.Project.archived).where(db.Project.id == project_id)
            ).first()
            if state is None:
                raise NotFound(f"project {project_id} does not exist")
            version, archived = state
            entry = self.cache.get(project_id, version)
            if entry is None:
                # A writer of this process may have committed and not yet advanced the cache: wait
                # for it and look again, rather than recompute the whole project (seconds on a
                # large one) in every reader that arrives in that window.
                s.rollback()  # end the read transaction: the next query sees the newest commit
                with self._locks.of(project_id):
                    state = s.execute(
                        select(db.Project.data_version, db.Project.archived).where(db.Project.id == project_id)
                    ).first()
                    if state is None:
                        raise NotFound(f"project {project_id} does not exist")
                    version, archived = state
                    entry = self.cache.get(project_id, version) or self._rebuild(s, project_id)
            return Snapshot(project_id, entry.data_version, archived, entry.model, entry.result, entry.versions)

    def _rebuild(self, s: Session, project_id: int) -> _Entry:
        for _ in range(5):
            row = repo.load_project_tree(s, project_id=project_id)
            if row is None:
                raise NotFound(f"project {project_id} does not exist")
            version = row.data_version
            data = project_file(row)
            versions = {p.tag: {c.slot: c.version for c in p.circuits} for p in row.panels}
            metered = metered_repo.active_overrides_va(s, project_id=project_id)  # NEC 220.87 existing loads
            # Someone may have written between the queries: only a stable version is cached.
            if repo.data_version(s, project_id=project_id) == version:
                break
            s.expire_all()
        model = pf.parse_project(data, source=f"project {project_id} in the database")
        calculator = Calculator(model, existing_load_override_va=metered)
        entry = _Entry(version, model, calculator, calculator.result(), versions, row.archived)
        self.cache.put(project_id, entry)
        return entry

    def _entry_in(self, s: Session, project_id: int, *, version: int) -> _Entry:
        """An entry from the rows this transaction sees, labelled ``version`` (called holding the write lock)."""
        row = repo.load_project_tree(s, project_id=project_id)
        if row is None:
            raise NotFound(f"project {project_id} does not exist")
        versions = {p.tag: {c.slot: c.version for c in p.circuits} for p in row.panels}
        metered = metered_repo.active_overrides_va(s, project_id=project_id)  # NEC 220.87 existing loads
        model = pf.parse_project(project_file(row), source=f"project {project_id} in the database")
        calculator = Calculator(model, existing_load_override_va=metered)
        return _Entry(version, model, calculator, calculator.result(), versions, row.archived)

    def export_file(self, project_id: int) -> dict[str, Any]:
        """The canonical version-1 file of a project."""
        return pf.dump_project(self.snapshot(project_id).model)

    def results_json(self, project_id: int) -> dict[str, Any]:
        return self.snapshot(project_id).result.to_json()

    # ----------------------------------------------------------------- whole-project writes

    def create_project(self, data: Mapping[str, Any]) -> int:
        """Create a project from a version-1 file; raises :class:`EditRejected` if it is invalid."""
        model = _validate(data)
        with self._tx() as s:
            row = db.Project(name=model.project.name, data_version=1)
            s.add(row)
            _sync_project(s, row, model)
            s.flush()
            return row.id

    def create_blank_project(self, form: Mapping[str, Any]) -> int:
        """A project from the new-project form: the firm's defaults (server.firm), then what the form gives."""
        from server import firm  # firm checks its values with this module's EditRejected

        with self.sessions() as s:
            info = firm.current(s)
        info.update({k: v for k, v in blank_to_none(form).items() if k in _INFO_FIELDS and v is not None})
        return self.create_project({"format": FORMAT_NAME, "version": FORMAT_VERSION, "project": info})

    def import_file(self, data: Mapping[str, Any], *, replace_existing: bool = False) -> ImportOutcome:
        """Import a version-1 file: a new project, or (``replace_existing``) the one with its number."""
        model = _validate(data)
        number = model.project.number
        with self.sessions() as s:
            same = repo.projects_with_number(s, number=number) if number else []
        if same and not replace_existing:
            raise EditRejected(
                [
                    Problem(
                        f"project number {number} already exists (id {same[0].id}); "
                        "replace it, or change the number in the file",
                        field="project.number",
                    )
                ]
            )
        if same:
            self.replace_project(same[0].id, pf.dump_project(model))
            return ImportOutcome(same[0].id, True)
        return ImportOutcome(self.create_project(pf.dump_project(model)), False)

    def replace_project(
        self, project_id: int, data: Mapping[str, Any], *, expected_data_version: int | None = None
    ) -> Snapshot:
        """Replace a project's whole content with a version-1 file (the API's PUT).

        With ``expected_data_version``, a project stored at another version is refused with
        :class:`StaleProject` inside the same transaction, so nothing is written.
        """
        return self._write(
            project_id, lambda _old: copy.deepcopy(dict(data)), expected_data_version=expected_data_version
        )

    def update_settings(
        self, project_id: int, form: Mapping[str, Any], *, expected_version: str | None = None
    ) -> Snapshot:
        values = {k: v for k, v in blank_to_none(form).items() if k in _INFO_FIELDS}
        if "include_future" not in values:
            values["include_future"] = False  # an unticked box sends nothing

        def build(data: dict[str, Any]) -> dict[str, Any]:
            self._check_form_version(project_id, data["project"], expected_version, "project", "The project", form)
            data["project"].update(values)
            return data

        return self._write(project_id, build, values=form, field_prefix="project.")

    def copy_project(self, project_id: int, *, name: str, number: str) -> int:
        data = self.export_file(project_id)
        data["project"]["name"] = name
        data["project"]["number"] = number
        return self.create_project(data)

    def set_archived(self, project_id: int, archived: bool) -> None:
        with self._tx() as s:
            row = repo.get_project(s, project_id=project_id)
            if row is None:
                raise NotFound(f"project {project_id} does not exist")
            row.archived = archived
            row.data_version += 1

    def _write(
        self,
        project_id: int,
        build: Callable[[dict[str, Any]], dict[str, Any]],
        *,
        values: Mapping[str, Any] | None = None,
        field_prefix: str = "",
        expected_data_version: int | None = None,
    ) -> Snapshot:
        """Read the file, let ``build`` change it, validate the whole project, then write it at once.

        The transaction first claims the next ``data_version`` (which takes the project's write
        lock until commit), so the file is read, changed and written with nobody writing between.
        """
        with self._locks.of(project_id):
            cached = self.cache.peek(project_id)
            with self._tx() as s:
                claimed = repo.claim_next_version(s, project_id=project_id)
                if claimed is None:
                    raise NotFound(f"project {project_id} does not exist")
                if expected_data_version is not None and claimed - 1 != expected_data_version:
                    raise StaleProject(project_id, expected_data_version, claimed - 1)  # rolls the claim back
                row = repo.load_project_tree(s, project_id=project_id)
                assert row is not None
                if cached is not None and cached.data_version == claimed - 1:
                    before = cached.model
                else:
                    before = pf.parse_project(project_file(row), source=f"project {project_id} in the database")
                data = build(pf.dump_project(before))
                try:
                    model = pf.parse_project(data)
                except ProjectFileError as exc:  # rolls the transaction back, version claim included
                    raise EditRejected(_strip_prefix(exc.problems, field_prefix), values) from None
                _sync_project(s, row, model)
            self.cache.drop(project_id)
            return self.snapshot(project_id)

    # ----------------------------------------------------------------- circuit edits (incremental)

    def edit_circuit(
        self,
        project_id: int,
        tag: str,
        slot: int,
        form: Mapping[str, Any],
        *,
        create: bool = False,
        expected_version: int | None = None,
    ) -> Snapshot:
        """Change (or, with ``create``, add) the circuit at ``slot`` of panel ``tag``; one transaction.

        With ``expected_version`` (the ``Circuit.version`` the editor showed), an edit of a circuit
        someone else changed since is refused with :class:`StaleEdit` and nothing is written.
        """
        values = {k: v for k, v in blank_to_none(form).items() if k in CIRCUIT_FORM_FIELDS}
        if "continuous" in form and values.get("continuous") is None:
            values["continuous"] = None

        def change(panel: Panel) -> Circuit | None:
            old = panel.circuit_at(slot)
            if old is None and not create:
                raise NotFound(f"panel {tag} has no circuit at slot {slot}")
            if old is not None and create:
                raise EditRejected([Problem("this slot already holds a circuit", tag, slot, "slot")], form)
            raw = {"slot": slot, "poles": 1} if old is None else circuit_raw(old)
            raw.update(values)
            if raw.get("feeds") is not None:
                raw.pop("va", None)  # computed from what it feeds
            problems: list[Problem] = []
            circuit = pf.parse_circuit(raw, problems, tag=tag)
            if problems:
                raise EditRejected(problems, form)
            return circuit

        return self._edit_panel_circuits(project_id, tag, slot, change, form, expected_version)

    def delete_circuit(self, project_id: int, tag: str, slot: int) -> Snapshot:
        def change(panel: Panel) -> Circuit | None:
            old = panel.circuit_at(slot)
            if old is None:
                raise NotFound(f"panel {tag} has no circuit at slot {slot}")
            if old.feeds:
                raise EditRejected(
                    [
                        Problem(
                            f"this breaker feeds {old.feeds}; delete or re-feed {old.feeds} on the distribution page",
                            tag,
                            slot,
                            "feeds",
                        )
                    ]
                )
            return None

        return self._edit_panel_circuits(project_id, tag, slot, change, {})

    def _edit_panel_circuits(
        self,
        project_id: int,
        tag: str,
        slot: int,
        change: Callable[[Panel], Circuit | None],
        form: Mapping[str, Any],
        expected_version: int | None = None,
    ) -> Snapshot:
        with self._locks.of(project_id):
            cached = self.cache.peek(project_id)
            # Claiming the next data_version first takes the project's write lock until commit:
            # edits from other threads or processes queue there instead of failing.
            with self._tx() as s:
                claimed = repo.claim_next_version(s, project_id=project_id)
                if claimed is None:
                    raise NotFound(f"project {project_id} does not exist")
                if cached is not None and cached.data_version == claimed - 1:
                    entry = cached  # nobody wrote since the cache was made: edit on top of it
                else:
                    entry = self._entry_in(s, project_id, version=claimed - 1)
                    self.cache.put(project_id, entry)
                snap = self._snapshot_of(project_id, entry)
                panel = snap.model.panel(tag)
                if panel is None:
                    raise NotFound(f"project {project_id} has no panel {tag}")
                circuit = change(panel)
                others = tuple(c for c in panel.circuits if c.slot != slot)
                new_circuits = tuple(sorted((*others, circuit) if circuit else others, key=lambda c: c.slot))
                new_panel = replace(panel, circuits=new_circuits)
                problems: list[Problem] = []
                pf.check_panel(new_panel, problems)
                new_model = pf.replace_panel(snap.model, new_panel)
                if circuit is not None and circuit.feeds:
                    pf.check_topology(new_model, problems)
                problems = [p for p in problems if p.tag == tag]  # other panels are unchanged
                if problems:
                    raise EditRejected(problems, form)  # rolls the transaction back, version claim included
                known_version = snap.circuit_versions.get(tag, {}).get(slot)
                old = panel.circuit_at(slot)
                new_version: int | None
                if circuit is not None and old is not None and known_version is not None:
                    # The common edit, an existing circuit changed: the entry is at the version just
                    # claimed minus one, so it holds the row's values and version; one UPDATE, no load.
                    if expected_version is not None and known_version != expected_version:
                        raise self._stale(s, project_id, tag, slot, form)  # rolls the transaction back
                    new_version = self._update_circuit_row(s, project_id, tag, slot, old, circuit, known_version, form)
                else:  # a circuit added or removed: through the ORM rows
                    new_version = self._write_circuit_row(s, project_id, tag, slot, circuit, expected_version, form)
            return self._advance(snap, new_model, new_panel, slot, new_version)

    @staticmethod
    def _write_circuit_row(
        s: Session,
        project_id: int,
        tag: str,
        slot: int,
        circuit: Circuit | None,
        expected_version: int | None,
        form: Mapping[str, Any],
    ) -> int | None:
        """Add, change or delete the row of circuit ``slot`` through the ORM (the flush writes its audit row)."""
        row = repo.find_circuit(s, project_id=project_id, tag=tag, slot=slot)
        panel_id = row.panel_id if row is not None else repo.panel_id(s, project_id=project_id, tag=tag)
        if panel_id is None:
            raise NotFound(f"project {project_id} has no panel {tag}")
        if expected_version is not None and row is not None and row.version != expected_version:
            raise StaleEdit.of(s, project_id, tag, row, form)  # rolls the transaction back
        if circuit is None:
            if row is not None:
                s.delete(row)
            return None
        if row is None:
            row = db.Circuit(panel_id=panel_id, slot=slot, version=1)
            s.add(row)
        _apply_circuit(row, circuit)
        s.flush()
        return row.version

    @staticmethod
    def _stale(s: Session, project_id: int, tag: str, slot: int, form: Mapping[str, Any]) -> StaleEdit:
        row = repo.find_circuit(s, project_id=project_id, tag=tag, slot=slot)
        assert row is not None
        return StaleEdit.of(s, project_id, tag, row, form)

    def _update_circuit_row(
        self,
        s: Session,
        project_id: int,
        tag: str,
        slot: int,
        old: Circuit,
        new: Circuit,
        version: int,
        form: Mapping[str, Any],
    ) -> int:
        """Write the changed fields of circuit ``slot`` with one UPDATE (guarded by the version the
        entry knows) and its audit row; the new row version (unchanged when nothing changed)."""
        before: dict[str, Any] = {}
        after: dict[str, Any] = {}
        for n in _CIRCUIT_FIELDS:
            a, b = getattr(old, n), getattr(new, n)
            a, b = getattr(a, "value", a), getattr(b, "value", b)  # StrEnum → its string, as stored
            if a != b:
                col = _COLUMN.get(n, n)
                before[col], after[col] = a, b
        if not after:
            return version  # nothing to write, as the ORM path would not either
        panel_id = select(db.Panel.id).where(db.Panel.project_id == project_id, db.Panel.tag == tag).scalar_subquery()
        stmt = (
            update(db.Circuit)
            .where(db.Circuit.panel_id == panel_id, db.Circuit.slot == slot, db.Circuit.version == version)
            .values(**after, version=version + 1)
            .returning(db.Circuit.version)
        )
        written = s.connection().execute(stmt).scalar()
        if written is None:  # the row is not what the entry says: refuse as stale rather than guess
            raise self._stale(s, project_id, tag, slot, form)
        from server import audit

        audit.record_circuit_update(s, project_id=project_id, tag=tag, slot=slot, before=before, after=after)
        return written

    def _advance(
        self, snap: Snapshot, new_model: Project, new_panel: Panel, slot: int, new_version: int | None
    ) -> Snapshot:
        """Bring the cached calculator to the new version with an incremental recompute."""
        entry = self.cache.get(snap.project_id, snap.data_version)
        if entry is None:
            with self.sessions() as s:
                entry = self._rebuild(s, snap.project_id)
        else:
            result = entry.calculator.update_panel(new_panel, checked_project=new_model)
            panel_versions = {k: v for k, v in entry.versions.get(new_panel.tag, {}).items() if k != slot}
            if new_version is not None:
                panel_versions[slot] = new_version
            versions = {**entry.versions, new_panel.tag: panel_versions}  # copied: older snapshots keep theirs
            # A new entry, swapped in at once: a reader never sees the new model beside the old result.
            entry = _Entry(snap.data_version + 1, new_model, entry.calculator, result, versions, entry.archived)
            self.cache.put(snap.project_id, entry)
        return Snapshot(snap.project_id, entry.data_version, snap.archived, entry.model, entry.result, entry.versions)

    @staticmethod
    def _snapshot_of(project_id: int, entry: _Entry) -> Snapshot:
        return Snapshot(project_id, entry.data_version, entry.archived, entry.model, entry.result, entry.versions)

    # ----------------------------------------------------------------- element edits

    def update_panel(
        self, project_id: int, tag: str, form: Mapping[str, Any], *, expected_version: str | None = None
    ) -> Snapshot:
        values = blank_to_none(form)
        top = {k: values.get(k) for k in PANEL_FORM_FIELDS if k in form}
        feeder = {k: values.get(f"feeder_{k}") for k in FEEDER_FORM_FIELDS if f"feeder_{k}" in form}

        def build(data: dict[str, Any]) -> dict[str, Any]:
            p = _find(data["panels"], tag, "panel")
            self._check_form_version(project_id, p, expected_version, f"panel {tag}", f"Panel {tag}", form)
            p.update(top)
            p["feeder"].update(feeder)
            return data

        return self._write(project_id, build, values=form, field_prefix="")

    def update_transformer(
        self, project_id: int, tag: str, form: Mapping[str, Any], *, expected_version: str | None = None
    ) -> Snapshot:
        values = blank_to_none(form)
        top = {k: values.get(k) for k in TRANSFORMER_FORM_FIELDS if k in form}
        feeder = {k: values.get(f"feeder_{k}") for k in FEEDER_FORM_FIELDS if f"feeder_{k}" in form}

        def build(data: dict[str, Any]) -> dict[str, Any]:
            t = _find(data["transformers"], tag, "transformer")
            self._check_form_version(project_id, t, expected_version, f"transformer {tag}", f"Transformer {tag}", form)
            t.update(top)
            t["feeder"].update(feeder)
            return data

        return self._write(project_id, build, values=form)

    def _check_form_version(
        self,
        project_id: int,
        element: dict[str, Any],
        expected: str | None,
        target: str,
        label: str,
        typed: Mapping[str, Any],
    ) -> None:
        """Refuse (StaleEdit) a form based on another content version of ``element`` (see server.versions)."""
        from server import versions

        if not expected or versions.of_plain(element) == expected:
            return
        with self.sessions() as s:
            stmt = select(db.AuditEvent.user_name).where(db.AuditEvent.project_id == project_id)
            if target != "project":
                stmt = stmt.where(db.AuditEvent.target == target)
            else:
                stmt = stmt.where(db.AuditEvent.target.like("project %"))
            who = s.scalar(stmt.order_by(db.AuditEvent.id.desc()).limit(1))
        raise StaleEdit(label, versions.flat(element), 0, who or "someone else", typed)

    # ----------------------------------------------------------------- tree edits

    def add_node(self, project_id: int, form: Mapping[str, Any]) -> Snapshot:
        """Add a source, transformer or panel; fed from a source/transformer by name, or from a panel by a new breaker."""
        values = blank_to_none(form)
        kind = values.get("kind") or "panel"
        tag = (values.get("tag") or "").strip()
        parent = values.get("parent")

        def build(data: dict[str, Any]) -> dict[str, Any]:
            if not tag:
                raise EditRejected([Problem("is required", field="tag")], form)
            if kind == "source":
                data["sources"].append({"tag": tag, "system": values.get("system"), "fault_ka": values.get("fault_ka")})
                return data
            if kind == "transformer":
                node: dict[str, Any] = {
                    "tag": tag,
                    "kva": values.get("kva"),
                    "primary": values.get("primary"),
                    "secondary": values.get("secondary"),
                    "impedance_pct": values.get("impedance_pct"),
                }
                data["transformers"].append(node)
            elif kind == "panel":
                node = {
                    "tag": tag,
                    "system": values.get("system"),
                    "bus_amps": values.get("bus_amps"),
                    "main_amps": values.get("main_amps"),
                    "spaces": values.get("spaces"),
                    "circuits": [],
                }
                data["panels"].append(node)
            else:
                raise EditRejected([Problem(f"unknown kind {kind!r}", field="kind")], form)
            _attach(data, node, parent, breaker_amps=values.get("breaker_amps"), form=form)
            return data

        return self._write(project_id, build, values=form)

    def move_node(self, project_id: int, tag: str, parent: str | None, *, breaker_amps: Any = None) -> Snapshot:
        """Re-feed ``tag`` from ``parent`` (a source, transformer or panel)."""

        def build(data: dict[str, Any]) -> dict[str, Any]:
            node = _find_node(data, tag)
            _detach(data, tag)
            _attach(data, node, parent, breaker_amps=breaker_amps, form={"parent": parent})
            return data

        return self._write(project_id, build, values={"parent": parent})

    def delete_node(
        self, project_id: int, tag: str, *, dependants: str = "refuse", refeed_to: str | None = None
    ) -> Snapshot:
        """Delete an element; what it feeds is deleted too (``"delete"``) or re-fed from ``refeed_to`` (``"refeed"``)."""

        def build(data: dict[str, Any]) -> dict[str, Any]:
            _find_node(data, tag)
            children = direct_children(data, tag)
            if children and dependants == "refuse":
                raise EditRejected(
                    [
                        Problem(
                            f"{tag} feeds {', '.join(children)}: delete them too, or re-feed them",
                            tag,
                            field="dependants",
                        )
                    ]
                )
            if dependants == "refeed" and children:
                if not refeed_to:
                    raise EditRejected([Problem("choose the element that will feed them", tag, field="refeed_to")])
                if refeed_to == tag or refeed_to in subtree(data, tag):
                    raise EditRejected(
                        [
                            Problem(
                                f"{refeed_to} is fed from {tag}; choose an element outside it", tag, field="refeed_to"
                            )
                        ]
                    )
                for child in children:
                    node = _find_node(data, child)
                    _detach(data, child)
                    _attach(data, node, refeed_to, breaker_amps=None, form={"refeed_to": refeed_to})
                doomed = {tag}
            else:
                doomed = {tag, *subtree(data, tag)}
            for t in doomed:
                _detach(data, t)
            for key in ("sources", "transformers", "panels"):
                data[key] = [n for n in data[key] if n["tag"] not in doomed]
            return data

        return self._write(project_id, build, values={"refeed_to": refeed_to or ""})

    # ----------------------------------------------------------------- revisions and the benchmark floor

    def issue_revision(self, project_id: int, *, description: str, issued_by: str) -> int:
        """Freeze the project file and its results as the next numbered revision."""
        snap = self.snapshot(project_id)
        project_json = pf.dumps_project(snap.model)
        results_json = json.dumps(snap.result.to_json(), indent=2, sort_keys=True)
        digest = hashlib.sha256((project_json + results_json).encode("utf-8")).hexdigest()
        with self._tx() as s:
            number = repo.next_revision_number(s, project_id=project_id)
            s.add(
                db.Revision(
                    project_id=project_id,
                    number=number,
                    description=description,
                    issued_by=issued_by,
                    project_json=project_json,
                    results_json=results_json,
                    content_hash=digest,
                )
            )
        return number

    def touch_circuit_notes(self, circuit_id: int, notes: str) -> None:
        """Write one row and nothing else: the floor the web benchmark compares edits against."""
        with self._tx() as s:
            row = s.get(db.Circuit, circuit_id)
            if row is None:
                raise NotFound(f"no circuit {circuit_id}")
            row.notes = notes

    def first_circuit_id(self, project_id: int) -> int:
        with self.sessions() as s:
            cid = s.scalar(
                select(db.Circuit.id).join(db.Panel).where(db.Panel.project_id == project_id).order_by(db.Circuit.id)
            )
            if cid is None:
                raise NotFound(f"project {project_id} has no circuits")
            return cid


# --------------------------------------------------------------------------- helpers on the file dict


def _validate(data: Mapping[str, Any]) -> Project:
    try:
        return pf.parse_project(data)
    except ProjectFileError as exc:
        raise EditRejected(exc.problems) from None


def _strip_prefix(problems: list[Problem], prefix: str) -> list[Problem]:
    if not prefix:
        return problems
    return [replace(p, field=p.field[len(prefix) :]) if p.field and p.field.startswith(prefix) else p for p in problems]


def _find(items: list[dict[str, Any]], tag: str, what: str) -> dict[str, Any]:
    for item in items:
        if item.get("tag") == tag:
            return item
    raise NotFound(f"there is no {what} {tag}")


def _find_node(data: dict[str, Any], tag: str) -> dict[str, Any]:
    for key in ("sources", "transformers", "panels"):
        for item in data[key]:
            if item.get("tag") == tag:
                return item
    raise NotFound(f"there is no element {tag}")


def _kind_of(data: dict[str, Any], tag: str) -> str | None:
    for key, kind in (("sources", "source"), ("transformers", "transformer"), ("panels", "panel")):
        if any(item.get("tag") == tag for item in data[key]):
            return kind
    return None


def direct_children(data: Mapping[str, Any], tag: str) -> list[str]:
    """Tags fed straight from ``tag`` (by ``fed_from`` or by one of its breakers)."""
    out = [n["tag"] for key in ("transformers", "panels") for n in data[key] if n.get("fed_from") == tag]
    for p in data["panels"]:
        if p["tag"] == tag:
            out.extend(c["feeds"] for c in p.get("circuits", []) if c.get("feeds") and c["feeds"] not in out)
    return out


def subtree(data: Mapping[str, Any], tag: str) -> list[str]:
    """Every tag downstream of ``tag`` (not including it)."""
    out: list[str] = []
    stack = direct_children(data, tag)
    while stack:
        t = stack.pop()
        if t in out:
            continue
        out.append(t)
        stack.extend(direct_children(data, t))
    return out


def _detach(data: dict[str, Any], tag: str) -> None:
    """Remove whatever feeds ``tag``: its ``fed_from`` and the breaker that feeds it."""
    for key in ("transformers", "panels"):
        for n in data[key]:
            if n["tag"] == tag:
                n["fed_from"] = None
    for p in data["panels"]:
        p["circuits"] = [c for c in p.get("circuits", []) if c.get("feeds") != tag]


def _attach(
    data: dict[str, Any], node: dict[str, Any], parent: str | None, *, breaker_amps: Any, form: Mapping[str, Any]
) -> None:
    """Feed ``node`` from ``parent``: by name from a source or transformer, or by a new breaker in a panel."""
    field_name = "refeed_to" if "refeed_to" in form else "parent"
    if not parent:
        raise EditRejected([Problem("choose what feeds it", field=field_name)], form)
    kind = _kind_of(data, parent)
    if kind is None:
        raise EditRejected([Problem(f"there is no element {parent}", field=field_name)], form)
    if kind != "panel":
        node["fed_from"] = parent
        return
    node["fed_from"] = None
    panel = _find(data["panels"], parent, "panel")
    poles = _feeding_poles(node)
    slot = _free_slot(panel, poles)
    if slot is None:
        raise EditRejected(
            [
                Problem(
                    f"panel {parent} has no free run of {poles} spaces for the feeding breaker",
                    field=field_name,
                )
            ],
            form,
        )
    panel["circuits"].append(
        {
            "slot": slot,
            "poles": poles,
            "description": f"Feeds {node['tag']}",
            "breaker_amps": breaker_amps,
            "feeds": node["tag"],
            "status": "new",
        }
    )


def _feeding_poles(node: Mapping[str, Any]) -> int:
    from server.calc.systems import SYSTEMS, SystemKind

    system = node.get("secondary") if "secondary" in node else node.get("system")
    spec = SYSTEMS.get(system or "")
    if spec is None:
        return 3
    if "secondary" in node:  # a transformer: 3 poles for a three-phase secondary, else 2
        return 3 if spec.three_phase else (1 if spec.kind == SystemKind.SINGLE else 2)
    return len(spec.phases)


def _free_slot(panel: Mapping[str, Any], poles: int) -> int | None:
    from server.calc.systems import breaker_slots

    spaces = int(panel.get("spaces") or 42)
    taken: set[int] = set()
    for c in panel.get("circuits", []):
        taken.update(breaker_slots(int(c["slot"]), max(int(c.get("poles") or 1), 1)))
    for s in range(1, spaces + 1):
        need = breaker_slots(s, poles)
        if all(x <= spaces and x not in taken for x in need):
            return s
    return None
