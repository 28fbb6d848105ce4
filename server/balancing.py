"""Phase balancing in the panel editor: preview a proposal, apply it as one edit, undo it.

Role: the service between the web routes (:mod:`server.web.routes.balance`) and the pure
balancer (:mod:`server.calc.balance`).  Nothing here computes a load: the proposal, its
before/after loading, bound and gap all come from :func:`server.calc.balance.balance_panel_in_project`,
the same call ``panelwright balance`` makes, so the preview and the CLI agree.

* :func:`preview` — the proposal for one panel of the stored project, with a fingerprint of the
  panel as it was read (:func:`panel_fingerprint`).  Writes nothing.
* :func:`rearrange` — apply a list of moves (a permutation applied at once, see
  :mod:`server.calc.balance`) in ONE transaction: the panel must still have the fingerprint the
  preview showed (else :class:`ArrangementChanged`, status 409, nothing written); the new panel
  is checked with :func:`server.calc.projectfile.check_panel` before anything is written; the
  moved circuit rows get their new slots through temporary negative slots (the database keeps
  ``(panel_id, slot)`` unique at every statement); the project's ``data_version`` and each moved
  circuit's ``version`` go up; and ONE audit row records the whole rearrangement (who, and for
  each moved entry its slot before and after).  Undo is the same call with the inverse moves.

A transformer secondary (:func:`preview_secondary`, :func:`rearrange_secondary`) works the same
way over every panel on it: each panel's moves and its proposed ``feeder_rotation`` are written in
one transaction with one audit row, and undo puts back the slots and the rotations as they were.

Why a fingerprint of the panel and not the project's ``data_version``: a colleague editing
another panel must not make a preview of this one unusable; the moves only need this panel's
circuits to be what the preview saw.

Moved circuits get ``version`` = (largest version in the panel) + 1, not just their own + 1, so
a page drawn before the move that still holds the old circuit's version for that slot can never
match the circuit now there; its edit is refused as stale (409) instead of landing on the wrong
breaker.

The audit trail's flush listener (:mod:`server.audit`) writes one row per changed ORM object;
a rearrangement would be one row per moved circuit there, so the slot updates here are plain
SQL statements (not seen by that listener) and the single audit row is written beside them
with the same columns and actor (:data:`server.audit.ACTOR`).
"""

from __future__ import annotations

import hashlib
import json
import logging
import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any, TypeVar

from sqlalchemy import select, update
from sqlalchemy.orm import Session

from server import audit
from server.calc import projectfile as pf
from server.calc.balance import (
    BalanceOptions,
    BalanceProposal,
    Move,
    Objective,
    TransformerBalanceProposal,
    apply_moves,
    balance_panel_in_project,
    balance_transformer,
    inverse_moves,
    secondary_panel_tags,
)
from server.calc.errors import CalcError, Problem, ProjectFileError
from server.calc.model import Panel, Project, ProjectInfo
from server.db import models as db
from server.repo import projects as repo
from server.services import Conflict, EditRejected, NotFound, Services, Snapshot

log = logging.getLogger("panelwright.balancing")
T = TypeVar("T")

#: Audit actions (the ``action`` column holds at most 20 characters).
ACTION_APPLY = "balance"
ACTION_UNDO = "undo-balance"  # one word: the history page uses it as a CSS class

#: Form fields of the options, in the order the form shows them.
OPTION_FIELDS = ("objective", "max_moves", "keep_sides", "allow_spaces", "include_future")
_TRUE = frozenset({"1", "on", "yes", "true"})


class ArrangementChanged(Conflict):
    """The panel changed between the preview and the apply (or undo); nothing was written."""

    def __init__(self, tag: str, changed_by: str | None) -> None:
        self.tag = tag
        self.changed_by = changed_by
        who = f" by {changed_by}" if changed_by else ""
        super().__init__(
            f"panel {tag} was changed{who} since this preview was made; nothing was written. "
            "Preview again to balance what is stored now."
        )


# --------------------------------------------------------------------------- options and moves


def parse_options(form: Mapping[str, Any]) -> BalanceOptions:
    """The balancer's options from the preview form; :class:`EditRejected` keyed by field otherwise.

    ``objective``: ``max-phase`` (default) or ``neutral``; ``max_moves``: blank (no cap) or a whole
    number ≥ 0; ``keep_sides`` / ``allow_spaces``: a ticked box; ``include_future``: blank (the
    project's setting), ``yes`` or ``no``.
    """
    problems: list[Problem] = []
    text = {k: str(form.get(k) or "").strip() for k in OPTION_FIELDS}
    objective = Objective.MAX_PHASE
    if text["objective"]:
        try:
            objective = Objective(text["objective"])
        except ValueError:
            choices = " or ".join(o.value for o in Objective)
            problems.append(Problem(f"{text['objective']!r} is not an objective (choose {choices})", field="objective"))
    max_moves: int | None = None
    if text["max_moves"]:
        if not text["max_moves"].isdigit():
            problems.append(Problem(f"{text['max_moves']!r} is not a whole number of 0 or more", field="max_moves"))
        else:
            max_moves = int(text["max_moves"])
            if max_moves > 999:
                problems.append(Problem("at most 999 moves (a panelboard has fewer breakers)", field="max_moves"))
    include_future: bool | None = None
    if text["include_future"] in ("yes", "no"):
        include_future = text["include_future"] == "yes"
    elif text["include_future"] not in ("", "project"):
        problems.append(
            Problem(f"{text['include_future']!r}: choose the project's setting, yes or no", field="include_future")
        )
    if problems:
        raise EditRejected(problems, text)
    return BalanceOptions(
        objective=objective,
        max_moves=max_moves,
        keep_sides=text["keep_sides"].lower() in _TRUE,
        allow_spaces=text["allow_spaces"].lower() in _TRUE,
        include_future=include_future,
    )


def option_values(options: BalanceOptions) -> dict[str, str]:
    """The form values that reproduce ``options`` (what the form shows after a preview)."""
    return {
        "objective": options.objective.value,
        "max_moves": "" if options.max_moves is None else str(options.max_moves),
        "keep_sides": "on" if options.keep_sides else "",
        "allow_spaces": "on" if options.allow_spaces else "",
        "include_future": "" if options.include_future is None else ("yes" if options.include_future else "no"),
    }


_MOVE = re.compile(r"^(\d{1,4}):(\d{1,4})$")


def format_moves(moves: Sequence[Move]) -> str:
    """Moves as the form carries them: ``"1:3 2:10"`` (first slot before : first slot after)."""
    return " ".join(f"{m.from_slot}:{m.to_slot}" for m in moves)


def parse_moves(text: str | None, tag: str) -> tuple[Move, ...]:
    """The inverse of :func:`format_moves`; :class:`EditRejected` naming the bad item otherwise."""
    items = (text or "").split()
    if not items:
        raise EditRejected([Problem("no moves were sent: preview again and apply from there", tag, field="moves")])
    moves: list[Move] = []
    for item in items:
        m = _MOVE.match(item)
        if m is None:
            raise EditRejected([Problem(f"{item!r} is not a move (write FROM:TO, e.g. 3:8)", tag, field="moves")])
        moves.append(Move(int(m.group(1)), int(m.group(2))))
    return tuple(moves)


def panel_fingerprint(panel: Panel) -> str:
    """SHA-256 (hex) of the panel as the version-1 project file writes it (every field, every circuit)."""
    data = pf.dump_project(Project(ProjectInfo(name=""), panels=(panel,)))["panels"][0]
    return hashlib.sha256(json.dumps(data, sort_keys=True, ensure_ascii=False).encode("utf-8")).hexdigest()


# --------------------------------------------------------------------------- preview


@dataclass(frozen=True)
class BalancePreview:
    """A proposal for one panel of the stored project, and what the apply form must send back."""

    snapshot: Snapshot
    tag: str
    current: Panel  # the panel as stored when the preview was made
    proposal: BalanceProposal
    fingerprint: str  # panel_fingerprint(current)

    @property
    def moves_text(self) -> str:
        return format_moves(self.proposal.moves)


def _panel(snap: Snapshot, tag: str) -> Panel:
    panel = snap.model.panel(tag)
    if panel is None:
        raise NotFound(f"project {snap.info.number or snap.project_id} has no panel {tag}")
    return panel


def _solved(tag: str, solve: Callable[[], T]) -> T:
    """Run a balancer; its refusals become an :class:`EditRejected` naming ``tag``."""
    try:
        return solve()
    except ProjectFileError as exc:
        raise EditRejected(exc.problems) from None
    except (CalcError, ValueError) as exc:
        raise EditRejected([Problem(f"cannot balance: {exc}", tag)]) from None


def preview(svc: Services, project_id: int, tag: str, options: BalanceOptions) -> BalancePreview:
    """Run the balancer on panel ``tag`` as stored now.  Writes nothing."""
    snap = svc.snapshot(project_id)
    current = _panel(snap, tag)
    proposal = _solved(tag, lambda: balance_panel_in_project(snap.model, tag, options))
    return BalancePreview(snap, tag, current, proposal, panel_fingerprint(current))


# --------------------------------------------------------------------------- apply / undo


@dataclass(frozen=True)
class Rearranged:
    """The outcome of an apply (or undo): the project after it, and how to undo it."""

    snapshot: Snapshot
    tag: str
    action: str  # ACTION_APPLY or ACTION_UNDO
    moves: tuple[Move, ...]  # what was applied
    before: Panel
    after: Panel
    fingerprint: str  # of ``after``: what the undo form sends back

    @property
    def undo_moves_text(self) -> str:
        return format_moves(inverse_moves(self.moves))

    @property
    def breakers_moved(self) -> int:
        return sum(1 for m in self.moves if not _is_space(self.before, m.from_slot))


def _is_space(panel: Panel, slot: int) -> bool:
    c = panel.circuit_at(slot)
    return c is not None and c.is_space


def _check_movable(panel: Panel, moves: Sequence[Move]) -> None:
    """Refuse moves the balancer itself never makes: a locked circuit or a sub-feed breaker."""
    problems: list[Problem] = []
    for m in moves:
        c = panel.circuit_at(m.from_slot)
        if c is None:
            continue  # apply_moves names it
        if c.locked:
            problems.append(Problem("this circuit is locked: the balancer never moves it", panel.tag, c.slot, "slot"))
        elif c.feeds:
            problems.append(
                Problem(
                    f"this breaker feeds {c.feeds}: sub-feed breakers stay where they are", panel.tag, c.slot, "slot"
                )
            )
    if problems:
        raise EditRejected(problems)


def _audit_key(c: Any, used: set[str]) -> str:
    base = "space" if c.is_space else (c.description.strip() or f"{c.poles}-pole circuit")
    key, n = base, 2
    while key in used:
        key, n = f"{base} ({n})", n + 1
    used.add(key)
    return key


def _last_changed_by(svc: Services, project_id: int, tag: str) -> str | None:
    with svc.sessions() as s:
        return s.scalar(
            select(db.AuditEvent.user_name)
            .where(db.AuditEvent.project_id == project_id, db.AuditEvent.panel_tag == tag)
            .order_by(db.AuditEvent.id.desc())
            .limit(1)
        )


def _move_circuit_rows(s: Session, panel_id: int, moves: Sequence[Move]) -> tuple[list[Any], int]:
    """Move circuit rows of one panel to their new slots; returns the panel's rows as they were
    read (id, slot, version) and the version given to the moved ones.

    Two steps so (panel_id, slot) stays unique after every statement: lift, then set down."""
    rows = s.execute(
        select(db.Circuit.id, db.Circuit.slot, db.Circuit.version).where(db.Circuit.panel_id == panel_id)
    ).all()
    by_slot = {r.slot: r for r in rows}
    new_version = max((r.version or 0 for r in rows), default=0) + 1
    moved = [(by_slot[m.from_slot].id, m.to_slot) for m in moves]
    for i, (cid, _to) in enumerate(moved):
        s.execute(
            update(db.Circuit)
            .where(db.Circuit.id == cid)
            .values(slot=-(i + 1))
            .execution_options(synchronize_session=False)
        )
    for cid, to_slot in moved:
        s.execute(
            update(db.Circuit)
            .where(db.Circuit.id == cid)
            .values(slot=to_slot, version=new_version)
            .execution_options(synchronize_session=False)
        )
    return list(rows), new_version


def _advance_cache(svc: Services, snap: Snapshot, after: Panel, versions: dict[int, int]) -> None:
    """Bring the cached calculator to the version just written with an incremental recompute.

    Why: dropping the cache would recompute the whole project on the next read (seconds on a
    500-panel project); ``Calculator.update_panel`` recomputes this panel and its ancestors only
    and is identical to a full compute.  The write just moved ``data_version`` from
    ``snap.data_version`` by one, so the entry cached at that version is the true predecessor;
    anything else (no entry, another version) is dropped and rebuilt on the next read.
    """
    entry = svc.cache.get(snap.project_id, snap.data_version)
    if entry is None:
        svc.cache.drop(snap.project_id)
        return
    try:
        result = entry.calculator.update_panel(after)
    except Exception:  # the write is committed: a failed shortcut must not become an error page
        log.exception("incremental recompute after rearranging %s failed; rebuilding on the next read", after.tag)
        svc.cache.drop(snap.project_id)
        return
    # A new entry swapped in at once: a reader never sees the new model beside the old result.
    svc.cache.put(
        snap.project_id,
        replace(
            entry,
            data_version=snap.data_version + 1,
            model=pf.replace_panel(entry.model, after),
            result=result,
            versions={**entry.versions, after.tag: versions},
        ),
    )


def rearrange(
    svc: Services,
    project_id: int,
    tag: str,
    moves: Sequence[Move],
    *,
    expected_fingerprint: str,
    action: str = ACTION_APPLY,
) -> Rearranged:
    """Apply ``moves`` to panel ``tag`` as one edit with one audit row (see the module docstring).

    Raises :class:`ArrangementChanged` when the stored panel no longer has
    ``expected_fingerprint``, :class:`EditRejected` when the moves are not a valid rearrangement
    of it (naming panel, slot and field), :class:`NotFound` for an unknown project or panel.
    """
    moves = tuple(moves)
    for _attempt in range(3):
        snap = svc.snapshot(project_id)
        before = _panel(snap, tag)
        if panel_fingerprint(before) != expected_fingerprint:
            raise ArrangementChanged(tag, _last_changed_by(svc, project_id, tag))
        _check_movable(before, moves)
        try:
            after = apply_moves(before, moves)  # lifts all, sets all down, then check_panel
        except ProjectFileError as exc:
            raise EditRejected(exc.problems) from None
        # In slot order, as the rows are read back (so the cached model and a rebuilt one agree).
        after = replace(after, circuits=tuple(sorted(after.circuits, key=lambda c: c.slot)))
        problems: list[Problem] = []
        pf.check_panel(after, problems)  # the engine's rules, once more on exactly what is written
        if problems:
            raise EditRejected(problems)
        used: set[str] = set()
        before_json: dict[str, int] = {}
        after_json: dict[str, int] = {}
        for m in moves:
            c = before.circuit_at(m.from_slot)
            assert c is not None  # apply_moves refused unknown slots
            key = _audit_key(c, used)
            before_json[key], after_json[key] = m.from_slot, m.to_slot
        with svc.sessions() as s, s.begin():
            if not repo.bump_data_version(s, project_id=project_id, expected=snap.data_version):
                continue  # someone wrote meanwhile: read again (the fingerprint decides)
            panel_id = repo.panel_id(s, project_id=project_id, tag=tag)
            if panel_id is None:
                raise NotFound(f"project {project_id} has no panel {tag}")
            rows, new_version = _move_circuit_rows(s, panel_id, moves)
            audit.record(
                s,
                project_id=project_id,
                panel_tag=tag,
                action=action,
                target=f"panel {tag} slots",
                before=before_json,
                after=after_json,
            )
            versions = {r.slot: r.version for r in rows if r.slot not in {m.from_slot for m in moves}}
            versions.update({m.to_slot: new_version for m in moves})
        _advance_cache(svc, snap, after, versions)
        new_snap = svc.snapshot(project_id)
        stored = _panel(new_snap, tag)
        return Rearranged(new_snap, tag, action, moves, before, stored, panel_fingerprint(stored))
    raise Conflict("the project kept changing while this rearrangement was saved; preview again")


# --------------------------------------------------------------------------- a transformer secondary
#
# The same pattern for a whole transformer secondary (:func:`server.calc.balance.balance_transformer`):
# each panel on it gets its in-panel moves AND its proposed feeder rotation, all in ONE
# transaction with ONE audit row; undo is the same call with each panel's inverse moves and its
# rotation as it was.  The fingerprint covers every panel on the secondary.

ACTION_APPLY_SECONDARY = "balance-secondary"
ACTION_UNDO_SECONDARY = "undo-secondary"


@dataclass(frozen=True)
class PanelPlan:
    """What applying a secondary proposal does to one panel: its moves and its feeder rotation."""

    tag: str
    moves: tuple[Move, ...]
    feeder_rotation: int


def format_plan(plans: Sequence[PanelPlan]) -> str:
    """Plans as the form carries them (JSON: panel, feeder_rotation, moves as ``"1:3 2:10"``)."""
    return json.dumps(
        [{"panel": p.tag, "feeder_rotation": p.feeder_rotation, "moves": format_moves(p.moves)} for p in plans],
        ensure_ascii=False,
    )


def parse_plan(text: str | None, tag: str) -> tuple[PanelPlan, ...]:
    """The inverse of :func:`format_plan`; :class:`EditRejected` naming what is wrong otherwise."""
    again = "preview again and apply from there"
    try:
        raw = json.loads(text or "")
    except json.JSONDecodeError:
        raise EditRejected([Problem(f"the plan was not sent whole: {again}", tag, field="plan")]) from None
    if not isinstance(raw, list) or not raw:
        raise EditRejected([Problem(f"no plan was sent: {again}", tag, field="plan")])
    plans: list[PanelPlan] = []
    for item in raw:
        if not isinstance(item, dict) or not isinstance(item.get("panel"), str):
            raise EditRejected([Problem(f"a plan item names no panel: {again}", tag, field="plan")])
        panel_tag = item["panel"]
        rotation = item.get("feeder_rotation")
        if rotation not in pf.FEEDER_ROTATIONS or isinstance(rotation, bool):
            raise EditRejected(
                [Problem(f"feeder_rotation must be 0, 1 or 2, not {rotation!r}", panel_tag, field="feeder_rotation")]
            )
        moves_text = item.get("moves") or ""
        moves = parse_moves(moves_text, panel_tag) if str(moves_text).strip() else ()
        plans.append(PanelPlan(panel_tag, moves, rotation))
    return tuple(plans)


def secondary_fingerprint(project: Project, tags: Sequence[str]) -> str:
    """SHA-256 (hex) over the fingerprints of the panels ``tags`` (each as :func:`panel_fingerprint`)."""
    parts = []
    for t in sorted(tags):
        panel = project.panel(t)
        parts.append(f"{t}={panel_fingerprint(panel) if panel is not None else '-'}")
    return hashlib.sha256("\n".join(parts).encode("utf-8")).hexdigest()


class SecondaryChanged(Conflict):
    """A panel on the secondary changed between the preview and the apply (or undo); nothing was written."""

    def __init__(self, tag: str) -> None:
        self.tag = tag
        super().__init__(
            f"a panel on the secondary of {tag} was changed since this preview was made; nothing was written. "
            "Preview again to balance what is stored now."
        )


@dataclass(frozen=True)
class SecondaryPreview:
    """A proposal for a transformer secondary of the stored project, and what the apply form sends back."""

    snapshot: Snapshot
    tag: str
    proposal: TransformerBalanceProposal
    fingerprint: str

    @property
    def plans(self) -> tuple[PanelPlan, ...]:
        rotation = {r.panel_tag: r.feeder_rotation for r in self.proposal.rotations if r.rotatable}
        stored = {p.tag: p.feeder_rotation for p in self.snapshot.model.panels}
        return tuple(
            PanelPlan(p.panel_tag, p.moves, rotation.get(p.panel_tag, stored.get(p.panel_tag, 0)))
            for p in self.proposal.panels
        )

    @property
    def plan_text(self) -> str:
        return format_plan(self.plans)


def _transformer_tags(snap: Snapshot, tag: str) -> tuple[str, ...]:
    if snap.model.transformer(tag) is None:
        raise NotFound(f"project {snap.info.number or snap.project_id} has no transformer {tag}")
    return secondary_panel_tags(snap.model, tag)


def preview_secondary(svc: Services, project_id: int, tag: str, options: BalanceOptions) -> SecondaryPreview:
    """Run the transformer balancer on ``tag``'s secondary as stored now.  Writes nothing."""
    snap = svc.snapshot(project_id)
    tags = _transformer_tags(snap, tag)
    proposal = _solved(tag, lambda: balance_transformer(snap.model, tag, options))
    return SecondaryPreview(snap, tag, proposal, secondary_fingerprint(snap.model, tags))


@dataclass(frozen=True)
class SecondaryRearranged:
    """The outcome of a secondary apply (or undo): the project after it, and how to undo it."""

    snapshot: Snapshot
    tag: str
    action: str
    plans: tuple[PanelPlan, ...]  # what was applied
    undo_plans: tuple[PanelPlan, ...]  # what puts it back
    fingerprint: str  # of the secondary after the write: what the undo form sends back
    breakers_moved: int
    landings_changed: int

    @property
    def undo_plan_text(self) -> str:
        return format_plan(self.undo_plans)


def rearrange_secondary(
    svc: Services,
    project_id: int,
    tag: str,
    plans: Sequence[PanelPlan],
    *,
    expected_fingerprint: str,
    action: str = ACTION_APPLY_SECONDARY,
) -> SecondaryRearranged:
    """Apply ``plans`` (moves and feeder rotations) to the panels on ``tag``'s secondary as ONE edit
    with ONE audit row.

    Raises :class:`SecondaryChanged` when the stored panels no longer have
    ``expected_fingerprint``, :class:`EditRejected` when a plan is not valid for them (naming
    panel, slot and field), :class:`NotFound` for an unknown project or transformer.
    """
    plans = tuple(plans)
    for _attempt in range(3):
        snap = svc.snapshot(project_id)
        tags = _transformer_tags(snap, tag)
        if secondary_fingerprint(snap.model, tags) != expected_fingerprint:
            raise SecondaryChanged(tag)
        problems: list[Problem] = []
        seen: set[str] = set()
        befores: dict[str, Panel] = {}
        afters: dict[str, Panel] = {}
        for plan in plans:
            if plan.tag not in tags or plan.tag in seen:
                what = "is named twice in the plan" if plan.tag in seen else f"is not on the secondary of {tag}"
                problems.append(Problem(what, plan.tag, field="plan"))
                continue
            seen.add(plan.tag)
            before = _panel(snap, plan.tag)
            _check_movable(before, plan.moves)
            try:
                after = apply_moves(before, plan.moves) if plan.moves else before
            except ProjectFileError as exc:
                raise EditRejected(exc.problems) from None
            after = replace(
                after,
                circuits=tuple(sorted(after.circuits, key=lambda c: c.slot)),
                feeder_rotation=plan.feeder_rotation,
            )
            befores[plan.tag], afters[plan.tag] = before, after
        if problems:
            raise EditRejected(problems)
        new_model = snap.model
        for after in afters.values():
            new_model = pf.replace_panel(new_model, after)
        try:  # the whole project once more, exactly as it will be stored (rotations need the topology)
            pf.parse_project(pf.dump_project(new_model))
        except ProjectFileError as exc:
            raise EditRejected(exc.problems) from None
        before_json: dict[str, int] = {}
        after_json: dict[str, int] = {}
        for plan in plans:
            before, after = befores[plan.tag], afters[plan.tag]
            used: set[str] = set()
            slots_before: dict[str, int] = {}
            slots_after: dict[str, int] = {}
            for m in plan.moves:
                c = before.circuit_at(m.from_slot)
                assert c is not None  # apply_moves refused unknown slots
                key = _audit_key(c, used)
                slots_before[key], slots_after[key] = m.from_slot, m.to_slot
            # Flat keys ("P2 feeder_rotation", "P2 slot of lights"), as the history page lists fields.
            if before.feeder_rotation != after.feeder_rotation:
                before_json[f"{plan.tag} feeder_rotation"] = before.feeder_rotation
                after_json[f"{plan.tag} feeder_rotation"] = after.feeder_rotation
            for key in slots_before:
                before_json[f"{plan.tag} slot of {key}"] = slots_before[key]
                after_json[f"{plan.tag} slot of {key}"] = slots_after[key]
        with svc.sessions() as s, s.begin():
            if not repo.bump_data_version(s, project_id=project_id, expected=snap.data_version):
                continue  # someone wrote meanwhile: read again (the fingerprint decides)
            for plan in plans:
                panel_id = repo.panel_id(s, project_id=project_id, tag=plan.tag)
                if panel_id is None:
                    raise NotFound(f"project {project_id} has no panel {plan.tag}")
                if befores[plan.tag].feeder_rotation != plan.feeder_rotation:
                    s.execute(
                        update(db.Panel)
                        .where(db.Panel.id == panel_id)
                        .values(feeder_rotation=plan.feeder_rotation)
                        .execution_options(synchronize_session=False)
                    )
                if not plan.moves:
                    continue
                _move_circuit_rows(s, panel_id, plan.moves)
            audit.record(
                s,
                project_id=project_id,
                panel_tag=None,
                action=action,
                target=f"transformer {tag} secondary",
                before=before_json,
                after=after_json,
            )
        svc.cache.drop(project_id)  # several panels changed: the next read rebuilds the calculator
        new_snap = svc.snapshot(project_id)
        undo = tuple(PanelPlan(p.tag, inverse_moves(p.moves), befores[p.tag].feeder_rotation) for p in plans)
        moved_breakers = sum(1 for p in plans for m in p.moves if not _is_space(befores[p.tag], m.from_slot))
        changed = sum(1 for p in plans if befores[p.tag].feeder_rotation != p.feeder_rotation)
        return SecondaryRearranged(
            new_snap,
            tag,
            action,
            plans,
            undo,
            secondary_fingerprint(new_snap.model, _transformer_tags(new_snap, tag)),
            moved_breakers,
            changed,
        )
    raise Conflict("the project kept changing while this rearrangement was saved; preview again")
