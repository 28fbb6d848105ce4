"""Load growth and existing conditions: the service behind the project manager's view.

* **Growth series** — every issued revision (its frozen version-1 file, :mod:`server.pdf.stored`)
  and the working copy, each computed by the engine twice: without and with ``future`` loads
  (the difference is the future band).  The metered existing loads active now apply to every
  snapshot: they describe the existing building, not a design revision, so the line shows the
  design changes only.  Results are cached in-process by (file hash, metered loads, future).
* **Dashboard** — every panel and transformer sorted by how close it is to a limit
  (:mod:`server.calc.headroom`), with its growth since the first issued revision.
* **What-if** — :mod:`server.calc.whatif` on the current snapshot; "apply" is an ordinary circuit
  edit through :meth:`server.services.Services.edit_circuit` (same validation and audit as the
  panel editor).
* **Metered existing load** — an uploaded CSV is held under a random token, analysed by
  :func:`server.calc.metered.analyze_csv` (nothing stored), and only on confirmation written to
  ``metered_load`` (older rows of that node deactivated, the project's ``data_version`` bumped
  so every cached result is recomputed with it).  A strict upload with a bad row is refused
  whole; a lenient one lists its bad rows, with line numbers, before the engineer confirms.

Design choice (NEC 220.87): the metered figure (maximum demand × 125 %) *replaces* the
existing circuits below the node; new loads are added on top with their own demand factors
(see :mod:`server.calc.engine`).
"""

from __future__ import annotations

import hashlib
import json
import math
import re
import secrets
import tempfile
import threading
import time
from collections import OrderedDict
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path, PurePath
from typing import Any

from server.calc import projectfile as pf
from server.calc.engine import compute_project
from server.calc.errors import MeteredDataError, Problem, ProjectFileError
from server.calc.headroom import Headroom, compute_headroom
from server.calc.metered import DEFAULT_PF, MeteredResult, analyze_csv
from server.calc.model import Category, Project
from server.calc.results import ProjectResult
from server.calc.whatif import AddedLoad, WhatIfPreview, preview
from server.charts import GrowthChartData, ProfileChartData
from server.db import models as db
from server.repo import metered as metered_repo
from server.repo import projects as repo
from server.services import EditRejected, NotFound, ServiceError, Services, Snapshot

WORKING_COPY = "Working copy"


# --------------------------------------------------------------------------- result cache


class _ResultCache:
    """(file hash, metered loads, include_future) → ProjectResult; least recently used out."""

    def __init__(self, size: int = 48) -> None:
        self.size = size
        self._data: OrderedDict[tuple, ProjectResult] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, project: Project, text: str, overrides: Mapping[str, float], include_future: bool) -> ProjectResult:
        key = (hashlib.sha256(text.encode("utf-8")).hexdigest(), tuple(sorted(overrides.items())), include_future)
        with self._lock:
            hit = self._data.get(key)
            if hit is not None:
                self._data.move_to_end(key)
                return hit
        result = compute_project(project, include_future=include_future, existing_load_override_va=overrides)
        with self._lock:
            self._data[key] = result
            while len(self._data) > self.size:
                self._data.popitem(last=False)
        return result


_RESULTS = _ResultCache()


# --------------------------------------------------------------------------- growth series


@dataclass(frozen=True)
class GrowthPoint:
    """One snapshot: an issued revision or the working copy, computed without and with future loads."""

    label: str
    number: int | None  # revision number; None for the working copy
    date: str
    model: Project
    result: ProjectResult  # include_future=False
    result_future: ProjectResult  # include_future=True


@dataclass(frozen=True)
class NodeValues:
    """One node in one snapshot (kVA; % of rating: panel design current ÷ bus/main, transformer loading)."""

    connected_kva: float
    demand_kva: float
    demand_future_kva: float
    pct: float | None
    pct_future: float | None


@dataclass(frozen=True)
class NodeSeries:
    tag: str
    kind: str  # "panel", "transformer" or "source"
    rating_label: str
    labels: tuple[str, ...]
    values: tuple[NodeValues | None, ...]  # None where the node did not exist

    def chart_data(self) -> GrowthChartData:
        def col(name: str) -> tuple[float | None, ...]:
            return tuple(None if v is None else getattr(v, name) for v in self.values)

        return GrowthChartData(
            tag=self.tag,
            labels=self.labels,
            connected_kva=col("connected_kva"),
            demand_kva=col("demand_kva"),
            demand_future_kva=col("demand_future_kva"),
            pct=col("pct"),
            pct_future=col("pct_future"),
            rating_label=self.rating_label,
        )

    @property
    def first(self) -> NodeValues | None:
        return next((v for v in self.values if v is not None), None)

    @property
    def last(self) -> NodeValues | None:
        return self.values[-1] if self.values else None


def node_values(result: ProjectResult, result_future: ProjectResult, tag: str) -> NodeValues | None:
    """The figures of ``tag`` in one snapshot, straight from the engine's results."""
    if (p := result.panels.get(tag)) is not None:
        pf_ = result_future.panels[tag]
        return NodeValues(
            p.connected_va_total / 1000.0,
            p.demand_va / 1000.0,
            pf_.demand_va / 1000.0,
            p.capacity_pct,
            pf_.capacity_pct,
        )
    if (t := result.transformers.get(tag)) is not None:
        tf = result_future.transformers[tag]
        return NodeValues(t.connected_kva, t.load_kva, tf.load_kva, t.loading_pct, tf.loading_pct)
    if (s := result.sources.get(tag)) is not None:
        sf = result_future.sources[tag]
        return NodeValues(s.connected_va / 1000.0, s.demand_va / 1000.0, sf.demand_va / 1000.0, None, None)
    return None


def rating_label(model: Project, tag: str) -> str:
    if (p := model.panel(tag)) is not None:
        main = f" / {p.main_amps} A main" if p.main_amps else ""
        return f"{p.bus_amps} A bus{main}"
    if (t := model.transformer(tag)) is not None:
        return f"{t.kva:g} kVA transformer"
    return "service (no rating in the project)"


def _kind(model: Project, tag: str) -> str:
    if model.panel(tag) is not None:
        return "panel"
    if model.transformer(tag) is not None:
        return "transformer"
    return "source"


# --------------------------------------------------------------------------- dashboard


@dataclass(frozen=True)
class DashboardRow:
    tag: str
    kind: str
    headroom: Headroom
    demand_kva: float
    pct: float | None
    first_demand_kva: float | None  # at the first issued revision (None: none issued, or the node is new)
    growth_kva: float | None
    growth_pct: float | None


# --------------------------------------------------------------------------- metered uploads

MAX_AGE_S = 6 * 3600
MAX_UPLOAD_BYTES = 50 * 1024 * 1024
_TOKEN_RE = re.compile(r"[A-Za-z0-9_-]{20,64}")


@dataclass(frozen=True)
class MeteredOptions:
    node: str
    pf: float = DEFAULT_PF
    tz: str | None = None
    strict: bool = False


@dataclass(frozen=True)
class MeteredPreview:
    """An analysed upload, not stored: the token lets the engineer confirm it."""

    token: str
    file_name: str
    options: MeteredOptions
    result: MeteredResult

    def chart_data(self) -> ProfileChartData:
        r = self.result
        return ProfileChartData(
            title=f"Metered demand at {self.options.node}: {self.file_name}",
            days=tuple(d.day.isoformat() for d in r.daily_peaks),
            daily_peak_kva=tuple(d.peak_kva for d in r.daily_peaks),
            peak_kva=r.peak_kva,
            peak_day=r.peak_at.date().isoformat(),
            existing_load_kva=r.existing_load_kva,
        )


class MeteredRefused(ServiceError):
    """The upload cannot be used; carries the bad rows (line, reason) when that is why."""

    def __init__(self, message: str, bad_rows: tuple[tuple[int, str], ...] = ()) -> None:
        self.bad_rows = bad_rows
        super().__init__(message)


class _Held:
    """Uploaded CSV files waiting for confirmation, by random token, in a private folder."""

    def __init__(self, folder: Path | None = None) -> None:
        self.folder = folder or Path(tempfile.gettempdir()) / "panelwright-metered"

    def save(self, project_id: int, file_name: str, data: bytes) -> str:
        self.folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        self.prune()
        token = secrets.token_urlsafe(24)
        (self.folder / f"{token}.csv").write_bytes(data)
        meta = {"project_id": project_id, "file_name": PurePath(file_name).name}
        (self.folder / f"{token}.json").write_text(json.dumps(meta), encoding="utf-8")
        return token

    def load(self, project_id: int, token: str) -> tuple[Path, str]:
        if not _TOKEN_RE.fullmatch(token or ""):
            raise MeteredRefused("the upload reference is not valid; upload the file again")
        body, meta = self.folder / f"{token}.csv", self.folder / f"{token}.json"
        try:
            info = json.loads(meta.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            raise MeteredRefused("the uploaded file has expired or was already used; upload it again") from None
        if info.get("project_id") != project_id or not body.exists():
            raise MeteredRefused("the uploaded file belongs to another project; upload it again")
        return body, str(info.get("file_name") or "upload.csv")

    def discard(self, token: str) -> None:
        if _TOKEN_RE.fullmatch(token or ""):
            for suffix in (".csv", ".json"):
                (self.folder / f"{token}{suffix}").unlink(missing_ok=True)

    def prune(self) -> None:
        cutoff = time.time() - MAX_AGE_S
        for f in self.folder.glob("*"):
            try:
                if f.stat().st_mtime < cutoff:
                    f.unlink()
            except OSError:
                pass


@dataclass(frozen=True)
class MeteredRow:
    id: int
    node_tag: str
    existing_load_kva: float
    basis: str
    peak_kva: float
    peak_at: str
    readings: int
    bad_rows: int
    coverage_days: float
    file_name: str
    uploaded_at: Any
    uploaded_by: str
    active: bool


# --------------------------------------------------------------------------- the service


class Growth:
    """Growth, headroom, what-if and metered existing load of the projects in ``services``."""

    def __init__(self, services: Services, *, hold_folder: Path | None = None) -> None:
        self.services = services
        self.held = _Held(hold_folder)

    # ---- reading

    def overrides(self, project_id: int) -> dict[str, float]:
        with self.services.sessions() as s:
            return metered_repo.active_overrides_va(s, project_id=project_id)

    def points(self, project_id: int) -> list[GrowthPoint]:
        """Every issued revision (oldest first) and the working copy, each without and with future loads."""
        from server.pdf.stored import stored_revisions

        snap = self.services.snapshot(project_id)
        overrides = self.overrides(project_id)
        out: list[GrowthPoint] = []
        for info, data in stored_revisions(self.services, project_id):
            model = pf.parse_project(data, source=f"revision {info.number}")
            out.append(self._point(f"Rev {info.number}", info.number, info.date, model, overrides))
        out.append(self._point(WORKING_COPY, None, "", snap.model, overrides))
        return out

    def _point(
        self, label: str, number: int | None, date: str, model: Project, overrides: Mapping[str, float]
    ) -> GrowthPoint:
        text = pf.dumps_project(model)
        return GrowthPoint(
            label,
            number,
            date,
            model,
            _RESULTS.get(model, text, overrides, False),
            _RESULTS.get(model, text, overrides, True),
        )

    def series(self, project_id: int, tag: str, points: list[GrowthPoint] | None = None) -> NodeSeries:
        points = points if points is not None else self.points(project_id)
        current = points[-1].model
        if _kind(current, tag) == "source" and current.source(tag) is None:
            raise NotFound(f"project {project_id} has no element {tag}")
        return NodeSeries(
            tag,
            _kind(current, tag),
            rating_label(current, tag),
            tuple(p.label for p in points),
            tuple(node_values(p.result, p.result_future, tag) for p in points),
        )

    def headroom(self, project_id: int) -> tuple[Snapshot, dict[str, Headroom]]:
        snap = self.services.snapshot(project_id)
        return snap, compute_headroom(snap.model, snap.result)

    def dashboard(self, project_id: int) -> tuple[Snapshot, list[DashboardRow], list[GrowthPoint]]:
        """Panels and transformers, closest to a limit first (highest use of any of their own limits)."""
        snap, heads = self.headroom(project_id)
        points = self.points(project_id)
        first = points[0] if len(points) > 1 else None
        rows: list[DashboardRow] = []
        for tag, h in heads.items():
            if h.kind == "source":
                continue
            now = node_values(snap.result, snap.result, tag)
            if now is None:
                continue
            base = node_values(first.result, first.result_future, tag) if first is not None else None
            growth = now.demand_kva - base.demand_kva if base is not None else None
            growth_pct = 100.0 * growth / base.demand_kva if base is not None and base.demand_kva > 0 else None
            rows.append(
                DashboardRow(
                    tag,
                    h.kind,
                    h,
                    now.demand_kva,
                    now.pct,
                    base.demand_kva if base is not None else None,
                    growth,
                    growth_pct,
                )
            )
        rows.sort(key=lambda r: (-r.headroom.used_pct, r.headroom.balanced_kva, r.tag))
        return snap, rows, points

    # ---- what-if

    def parse_added_load(self, tag: str, form: Mapping[str, Any]) -> AddedLoad:
        """The what-if form → :class:`AddedLoad`; EditRejected keyed by field otherwise."""
        problems: list[Problem] = []

        def number(name: str, *, required: bool) -> float | None:
            raw = str(form.get(name) or "").strip()
            if not raw:
                if required:
                    problems.append(Problem("is required", tag, field=name))
                return None
            try:
                value = float(raw)
            except ValueError:
                problems.append(Problem(f"{raw!r} is not a number", tag, field=name))
                return None
            if not math.isfinite(value):
                problems.append(Problem(f"{raw!r} is not a number", tag, field=name))
                return None
            return value

        kva = number("kva", required=True)
        if kva is not None and not 0 < kva <= 100_000:
            problems.append(Problem("must be more than 0 and at most 100 000 kVA", tag, field="kva"))
        poles = number("poles", required=True)
        if poles is not None and (poles not in (1.0, 2.0, 3.0)):
            problems.append(Problem("must be 1, 2 or 3", tag, field="poles"))
        pf_value = number("pf", required=False)
        slot = number("slot", required=False)
        if slot is not None and (slot < 1 or not slot.is_integer()):
            problems.append(Problem("must be a whole slot number from 1", tag, field="slot"))
        cat_raw = str(form.get("category") or "").strip()
        try:
            category = Category(cat_raw)
        except ValueError:
            category = Category.EQUIPMENT
            problems.append(
                Problem(f"{cat_raw!r} is not one of {', '.join(c.value for c in Category)}", tag, field="category")
            )
        cont_raw = str(form.get("continuous") or "").strip().lower()
        continuous = {"yes": True, "no": False}.get(cont_raw)
        if problems:
            raise EditRejected(problems, form)
        assert kva is not None and poles is not None
        return AddedLoad(
            tag=tag,
            load_va=kva * 1000.0,
            category=category,
            poles=int(poles),
            pf=pf_value,
            continuous=continuous,
            description=str(form.get("description") or "").strip()[:200],
            slot=int(slot) if slot is not None else None,
        )

    def whatif(self, project_id: int, tag: str, form: Mapping[str, Any]) -> tuple[Snapshot, WhatIfPreview]:
        """Preview; nothing is written."""
        snap = self.services.snapshot(project_id)
        if snap.model.panel(tag) is None:
            raise NotFound(f"project {project_id} has no panel {tag}")
        req = self.parse_added_load(tag, form)
        try:
            pv = preview(snap.model, snap.result, req, existing_load_override_va=self.overrides(project_id))
        except ProjectFileError as exc:
            raise EditRejected(exc.problems, form) from None
        return snap, pv

    def apply_whatif(self, project_id: int, tag: str, form: Mapping[str, Any]) -> tuple[Snapshot, int]:
        """Save the previewed circuit as an ordinary panel-editor edit; returns the snapshot and slot."""
        if not str(form.get("slot") or "").strip():
            raise EditRejected([Problem("preview first: the slot to use is not set", tag, field="slot")], form)
        _snap, pv = self.whatif(project_id, tag, form)
        c = pv.circuit
        edit = {
            "description": c.description,
            "category": c.category.value if c.category else "",
            "poles": str(c.poles),
            "va": f"{c.va:g}",
            "pf": "" if c.pf is None else f"{c.pf:g}",
            "continuous": "" if c.continuous is None else ("yes" if c.continuous else "no"),
            "breaker_amps": "" if c.breaker_amps is None else str(c.breaker_amps),
            "status": c.status.value,
        }
        snap = self.services.edit_circuit(project_id, tag, c.slot, edit, create=not pv.option.replaces_space)
        return snap, c.slot

    # ---- metered existing load

    def node_tags(self, project_id: int) -> list[str]:
        m = self.services.snapshot(project_id).model
        return [*(s.tag for s in m.sources), *(t.tag for t in m.transformers), *(p.tag for p in m.panels)]

    def parse_metered_options(self, project_id: int, form: Mapping[str, Any]) -> MeteredOptions:
        problems: list[Problem] = []
        node = str(form.get("node") or "").strip()
        if node not in self.node_tags(project_id):
            problems.append(
                Problem(f"choose a source, transformer or panel of this project (got {node!r})", field="node")
            )
        pf_raw = str(form.get("pf") or "").strip()
        pf_value = DEFAULT_PF
        if pf_raw:
            try:
                pf_value = float(pf_raw)
                if not 0 < pf_value <= 1:
                    raise ValueError
            except ValueError:
                problems.append(Problem(f"{pf_raw!r}: a power factor is more than 0 and at most 1", field="pf"))
        tz = str(form.get("tz") or "").strip() or None
        strict = str(form.get("strict") or "").strip().lower() in {"on", "yes", "true", "1"}
        if problems:
            raise EditRejected(problems, form)
        return MeteredOptions(node, pf_value, tz, strict)

    def _analyze(self, path: Path, file_name: str, options: MeteredOptions) -> MeteredResult:
        try:
            return analyze_csv(path, pf=options.pf, tz=options.tz, strict=options.strict, name=file_name)
        except MeteredDataError as exc:
            raise MeteredRefused(str(exc), exc.bad_rows) from None

    def metered_preview(self, project_id: int, file_name: str, data: bytes, form: Mapping[str, Any]) -> MeteredPreview:
        """Analyse an uploaded CSV; nothing is stored in the project (the file waits under a token)."""
        options = self.parse_metered_options(project_id, form)
        name = PurePath(file_name or "upload.csv").name
        if not data:
            raise MeteredRefused(f"{name}: the file is empty")
        if len(data) > MAX_UPLOAD_BYTES:
            raise MeteredRefused(f"{name}: the file is larger than {MAX_UPLOAD_BYTES // (1024 * 1024)} MB")
        token = self.held.save(project_id, name, data)
        path, _ = self.held.load(project_id, token)
        try:
            result = self._analyze(path, name, options)
        except MeteredRefused:
            self.held.discard(token)
            raise
        return MeteredPreview(token, name, options, result)

    def metered_confirm(self, project_id: int, token: str, form: Mapping[str, Any], *, user: str = "") -> int:
        """Store the held upload's existing load for its node (active) and recompute; returns the row id."""
        options = self.parse_metered_options(project_id, form)
        path, name = self.held.load(project_id, token)
        result = self._analyze(path, name, options)
        if result.existing_load_kva is None:
            raise MeteredRefused(f"{name}: {result.message} (NEC 220.87 needs at least 30 days); nothing was stored")
        with self.services.sessions() as s, s.begin():
            project = repo.get_project(s, project_id=project_id)
            if project is None:
                raise NotFound(f"project {project_id} does not exist")
            metered_repo.deactivate_node(s, project_id=project_id, node_tag=options.node)
            row = db.MeteredLoad(
                project_id=project_id,
                node_tag=options.node,
                existing_load_kva=result.existing_load_kva,
                basis=result.basis.value,
                peak_kva=result.peak_kva,
                peak_at=result.peak_at.isoformat(),
                readings=result.readings,
                bad_rows=len(result.bad_rows),
                coverage_days=result.coverage_days,
                file_name=name[:255],
                uploaded_by=user[:60],
                active=True,
            )
            s.add(row)
            project.data_version += 1  # every cached result is recomputed with the metered load
            s.flush()
            row_id = row.id
        self.held.discard(token)
        return row_id

    def metered_rows(self, project_id: int) -> list[MeteredRow]:
        with self.services.sessions() as s:
            return [
                MeteredRow(
                    r.id,
                    r.node_tag,
                    r.existing_load_kva,
                    r.basis,
                    r.peak_kva,
                    r.peak_at,
                    r.readings,
                    r.bad_rows,
                    r.coverage_days,
                    r.file_name,
                    r.uploaded_at,
                    r.uploaded_by,
                    r.active,
                )
                for r in metered_repo.list_metered(s, project_id=project_id)
            ]

    def set_metered_active(self, project_id: int, metered_id: int, active: bool) -> None:
        with self.services.sessions() as s, s.begin():
            row = metered_repo.get_metered(s, project_id=project_id, metered_id=metered_id)
            project = repo.get_project(s, project_id=project_id)
            if row is None or project is None:
                raise NotFound(f"project {project_id} has no metered load {metered_id}")
            if active:
                metered_repo.deactivate_node(s, project_id=project_id, node_tag=row.node_tag)
                s.flush()
                s.refresh(row)
            row.active = active
            project.data_version += 1
