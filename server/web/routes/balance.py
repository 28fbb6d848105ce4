"""Phase balancing in the panel editor: preview (current | proposed), apply as one edit, undo.

Thin: parse → :mod:`server.balancing` → typed context → template.  With ``HX-Request`` each
route answers with a fragment for ``#balance-area`` of the panel page (after an apply or undo
also the grid rows, phase totals, summary and upstream badges, out of band); without htmx the
same routes render a page of their own, so everything also works without script.

A transformer secondary has a page of its own (``/projects/{pid}/transformers/{tag}/balance``,
no htmx needed): every panel on it balanced plus each panel's feeder landing, applied as one
edit with one audit row and undone the same way (:func:`server.balancing.rearrange_secondary`).

Permissions: preview, apply and undo all ask for ``edit``.  The preview writes nothing, but it
is a step of changing the panel, and a reviewer cannot apply it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from urllib.parse import quote

from fastapi import APIRouter, Depends, Request
from fastapi.responses import Response

from server import balancing
from server.auth.permissions import Require
from server.auth.roles import Permission
from server.balancing import ArrangementChanged, BalancePreview, Rearranged
from server.calc.balance import BalanceOptions, Objective, inverse_moves
from server.calc.errors import Problem
from server.calc.model import Panel
from server.services import EditRejected, NotFound, Snapshot
from server.web.deps import FormDep, HtmxDep, ServicesDep, TemplatesDep
from server.web.views import Page, PairRow, PanelContext, feeder_landing_words, page, panel_context, panel_rows

EDIT = [Depends(Require(Permission.EDIT))]

router = APIRouter(tags=["balance"])

BALANCE = "/projects/{pid}/panels/{tag}/balance"


def balance_url(pid: int, tag: str, what: str = "") -> str:
    """Every URL of the balancing screens (one builder)."""
    return f"/projects/{pid}/panels/{quote(tag, safe='')}/balance" + (f"/{what}" if what else "")


def panel_url(pid: int, tag: str) -> str:
    return f"/projects/{pid}/panels/{quote(tag, safe='')}"


# --------------------------------------------------------------------------- contexts


@dataclass(frozen=True)
class Board:
    """One panelboard drawn read-only: its pair rows, and the slots of moved entries mapped to the other slot."""

    key: str  # "current" or "proposed": prefix of the cell ids
    title: str
    rows: list[PairRow]
    moved: dict[int, int]  # slot on this board → slot on the other board
    arrow: str  # "→" on the current board (moves to), "←" on the proposed one (comes from)


@dataclass(frozen=True)
class LoadingRow:
    """One line of the before/after table: label, before, after, and whether lower is better here."""

    label: str
    role: str  # data-role of the cells, for tests and the browser
    before: str
    after: str


@dataclass(frozen=True)
class BalanceContext:
    """The balance fragment: the options form and, when it ran, the proposal side by side."""

    page: Page
    pid: int
    tag: str
    system: str
    values: dict[str, str]  # the options as the form shows them
    errors: dict[str, str] = field(default_factory=dict)  # keyed by option field ("" = not tied to one)
    preview: BalancePreview | None = None
    boards: tuple[Board, ...] = ()
    loading: tuple[LoadingRow, ...] = ()
    objectives: tuple[str, ...] = tuple(o.value for o in Objective)

    @property
    def preview_url(self) -> str:
        return balance_url(self.pid, self.tag)

    @property
    def apply_url(self) -> str:
        return balance_url(self.pid, self.tag, "apply")

    @property
    def panel_url(self) -> str:
        return panel_url(self.pid, self.tag)


@dataclass(frozen=True)
class OutcomeContext:
    """After an apply or an undo (or a refusal): the message, the undo form, the refreshed panel."""

    page: Page
    pid: int
    tag: str
    message: str
    error: bool = False
    rearranged: Rearranged | None = None
    panel: PanelContext | None = None  # the panel editor's context after the write (out-of-band swaps)
    undo_moves: str = ""
    undo_fingerprint: str = ""

    @property
    def preview_url(self) -> str:
        return balance_url(self.pid, self.tag)

    @property
    def undo_url(self) -> str:
        return balance_url(self.pid, self.tag, "undo")

    @property
    def panel_url(self) -> str:
        return panel_url(self.pid, self.tag)


def _va(x: float) -> str:
    return f"{x:,.0f}"


def _loading_rows(pv: BalancePreview) -> tuple[LoadingRow, ...]:
    p = pv.proposal
    rows = [
        LoadingRow(f"Phase {ph} (VA)", f"phase-{ph}", _va(p.before.phase_va[ph]), _va(p.after.phase_va[ph]))
        for ph in p.before.phase_va
    ]
    rows.append(LoadingRow("Largest phase (VA)", "max-phase", _va(p.before.max_phase_va), _va(p.after.max_phase_va)))
    rows.append(
        LoadingRow("Imbalance", "imbalance", f"{p.before.imbalance_pct:.1f} %", f"{p.after.imbalance_pct:.1f} %")
    )
    if p.before.neutral_amps is not None and p.after.neutral_amps is not None:
        rows.append(LoadingRow("Neutral (A)", "neutral", f"{p.before.neutral_amps:.1f}", f"{p.after.neutral_amps:.1f}"))
    return tuple(rows)


def _boards(pv: BalancePreview) -> tuple[Board, ...]:
    moves = pv.proposal.moves
    return (
        Board("current", "Current", panel_rows(pv.current, None), {m.from_slot: m.to_slot for m in moves}, "→"),
        Board(
            "proposed", "Proposed", panel_rows(pv.proposal.panel, None), {m.to_slot: m.from_slot for m in moves}, "←"
        ),
    )


def _panel_of(snap: Snapshot, tag: str) -> Panel:
    panel = snap.model.panel(tag)
    if panel is None:
        raise NotFound(f"project {snap.info.number or snap.project_id} has no panel {tag}")
    return panel


def _context(
    snap: Snapshot,
    tag: str,
    values: dict[str, str],
    *,
    errors: dict[str, str] | None = None,
    pv: BalancePreview | None = None,
) -> BalanceContext:
    panel = _panel_of(snap, tag)
    return BalanceContext(
        page=page(snap, f"Balance phases of {tag}", "tree"),
        pid=snap.project_id,
        tag=tag,
        system=panel.system,
        values=values,
        errors=errors or {},
        preview=pv,
        boards=_boards(pv) if pv else (),
        loading=_loading_rows(pv) if pv else (),
    )


def _render(
    request: Request,
    templates: TemplatesDep,
    htmx: bool,
    fragment: str,
    ctx: BalanceContext | OutcomeContext,
    status: int = 200,
) -> Response:
    """The fragment for htmx (into ``#balance-area``); a page of its own around it otherwise."""
    data = {"ctx": ctx, "page": ctx.page, "htmx": htmx, "fragment": fragment}
    return templates.TemplateResponse(request, fragment if htmx else "balance/page.html", data, status_code=status)


# --------------------------------------------------------------------------- routes


@router.get(BALANCE, name="balance_preview", dependencies=EDIT)
def preview(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep) -> Response:
    """Run the balancer with the options in the query (defaults: the CLI's) and show the proposal."""
    form = {k: v for k, v in request.query_params.items() if k in balancing.OPTION_FIELDS}
    try:
        options = balancing.parse_options(form)
    except EditRejected as exc:
        snap = svc.snapshot(pid)
        ctx = _context(snap, tag, {k: str(form.get(k, "")) for k in balancing.OPTION_FIELDS}, errors=exc.by_field())
        return _render(request, templates, htmx, "balance/_preview.html", ctx, 422)
    values = balancing.option_values(options)
    try:
        pv = balancing.preview(svc, pid, tag, options)
    except EditRejected as exc:
        ctx = _context(svc.snapshot(pid), tag, values, errors=exc.by_field())
        return _render(request, templates, htmx, "balance/_preview.html", ctx, 422)
    ctx = _context(pv.snapshot, tag, values, pv=pv)
    return _render(request, templates, htmx, "balance/_preview.html", ctx)


@router.post(BALANCE + "/apply", name="balance_apply", dependencies=EDIT)
def apply(
    request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep, form: FormDep
) -> Response:
    """Apply the previewed moves as one edit (409 if the panel changed since the preview)."""
    return _rearrange(request, pid, tag, svc, templates, htmx, form, balancing.ACTION_APPLY)


@router.post(BALANCE + "/undo", name="balance_undo", dependencies=EDIT)
def undo(
    request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, htmx: HtmxDep, form: FormDep
) -> Response:
    """Put back the arrangement an apply replaced (409 if the panel changed since the apply)."""
    return _rearrange(request, pid, tag, svc, templates, htmx, form, balancing.ACTION_UNDO)


def _rearrange(
    request: Request,
    pid: int,
    tag: str,
    svc: ServicesDep,
    templates: TemplatesDep,
    htmx: bool,
    form: dict,
    action: str,
) -> Response:
    def refused(message: str, status: int) -> Response:
        snap = svc.snapshot(pid)
        _panel_of(snap, tag)
        ctx = OutcomeContext(page(snap, f"Balance phases of {tag}", "tree"), pid, tag, message, error=True)
        return _render(request, templates, htmx, "balance/_outcome.html", ctx, status)

    fingerprint = str(form.get("fingerprint") or "").strip()
    try:
        moves = balancing.parse_moves(form.get("moves"), tag)
        if not fingerprint:
            raise EditRejected([Problem("missing: preview again and apply from there", tag, field="fingerprint")])
        done = balancing.rearrange(svc, pid, tag, moves, expected_fingerprint=fingerprint, action=action)
    except ArrangementChanged as exc:
        return refused(str(exc), 409)
    except EditRejected as exc:
        what = "applied" if action == balancing.ACTION_APPLY else "undone"
        return refused(f"Not {what}: " + "; ".join(p.describe() for p in exc.problems), 422)
    n = done.breakers_moved
    if action == balancing.ACTION_APPLY:
        message = f"Balanced: {n} breaker{'s' if n != 1 else ''} moved in one edit."
    else:
        message = f"Undone: the previous arrangement of {tag} is back ({n} breaker{'s' if n != 1 else ''} moved back)."
    ctx = OutcomeContext(
        page=page(done.snapshot, f"Balance phases of {tag}", "tree"),
        pid=pid,
        tag=tag,
        message=message,
        rearranged=done,
        panel=panel_context(done.snapshot, tag),
        undo_moves=balancing.format_moves(inverse_moves(done.moves)) if action == balancing.ACTION_APPLY else "",
        undo_fingerprint=done.fingerprint,
    )
    return _render(request, templates, htmx, "balance/_outcome.html", ctx)


# --------------------------------------------------------------------------- a transformer secondary

SECONDARY = "/projects/{pid}/transformers/{tag}/balance"


def secondary_url(pid: int, tag: str, what: str = "") -> str:
    return f"/projects/{pid}/transformers/{quote(tag, safe='')}/balance" + (f"/{what}" if what else "")


@dataclass(frozen=True)
class LandingRow:
    """One panel of a secondary proposal: its feeder landing now and proposed, and its moves."""

    tag: str
    rotatable: bool
    landing_now: str
    landing_proposed: str
    breaker_moves: int


@dataclass(frozen=True)
class SecondaryContext:
    """The secondary balance page: options, the proposal (or the outcome of an apply/undo)."""

    page: Page
    pid: int
    tag: str
    secondary: str
    values: dict[str, str]
    errors: dict[str, str] = field(default_factory=dict)
    preview: balancing.SecondaryPreview | None = None
    loading: tuple[LoadingRow, ...] = ()
    landings: tuple[LandingRow, ...] = ()
    message: str = ""
    error: bool = False
    done: balancing.SecondaryRearranged | None = None
    objectives: tuple[str, ...] = tuple(o.value for o in Objective)

    @property
    def preview_url(self) -> str:
        return secondary_url(self.pid, self.tag)

    @property
    def apply_url(self) -> str:
        return secondary_url(self.pid, self.tag, "apply")

    @property
    def undo_url(self) -> str:
        return secondary_url(self.pid, self.tag, "undo")

    @property
    def transformer_url(self) -> str:
        return f"/projects/{self.pid}/transformers/{quote(self.tag, safe='')}"


def _secondary_context(
    snap: Snapshot,
    tag: str,
    values: dict[str, str],
    *,
    errors: dict[str, str] | None = None,
    pv: balancing.SecondaryPreview | None = None,
    message: str = "",
    error: bool = False,
    done: balancing.SecondaryRearranged | None = None,
) -> SecondaryContext:
    xfmr = snap.model.transformer(tag)
    if xfmr is None:
        raise NotFound(f"project {snap.info.number or snap.project_id} has no transformer {tag}")
    loading: tuple[LoadingRow, ...] = ()
    landings: tuple[LandingRow, ...] = ()
    if pv is not None:
        p = pv.proposal
        loading = tuple(
            LoadingRow(f"Phase {ph} (VA)", f"phase-{ph}", _va(p.before_phase_va[ph]), _va(p.after_phase_va[ph]))
            for ph in p.before_phase_va
        ) + (
            LoadingRow(
                "Largest phase (VA)",
                "max-phase",
                _va(max(p.before_phase_va.values())),
                _va(max(p.after_phase_va.values())),
            ),
        )
        moves = {bp.panel_tag: bp.breaker_moves for bp in p.panels}
        plans = {plan.tag: plan for plan in pv.plans}
        landings = tuple(
            LandingRow(
                r.panel_tag,
                r.rotatable,
                feeder_landing_words(_stored_rotation(snap, r.panel_tag)),
                feeder_landing_words(plans[r.panel_tag].feeder_rotation),
                moves.get(r.panel_tag, 0),
            )
            for r in p.rotations
        )
    return SecondaryContext(
        page=page(snap, f"Balance the secondary of {tag}", "tree"),
        pid=snap.project_id,
        tag=tag,
        secondary=xfmr.secondary,
        values=values,
        errors=errors or {},
        preview=pv,
        loading=loading,
        landings=landings,
        message=message,
        error=error,
        done=done,
    )


def _stored_rotation(snap: Snapshot, tag: str) -> int:
    panel = snap.model.panel(tag)
    return panel.feeder_rotation if panel is not None else 0


def _secondary_page(request: Request, templates: TemplatesDep, ctx: SecondaryContext, status: int = 200) -> Response:
    return templates.TemplateResponse(
        request, "balance/secondary.html", {"ctx": ctx, "page": ctx.page}, status_code=status
    )


@router.get(SECONDARY, name="secondary_balance_preview", dependencies=EDIT)
def secondary_preview(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep) -> Response:
    """Balance every panel on the secondary and propose each panel's feeder landing; writes nothing."""
    form = {k: v for k, v in request.query_params.items() if k in balancing.OPTION_FIELDS}
    try:
        options = balancing.parse_options(form)
    except EditRejected as exc:
        values = {k: str(form.get(k, "")) for k in balancing.OPTION_FIELDS}
        ctx = _secondary_context(svc.snapshot(pid), tag, values, errors=exc.by_field())
        return _secondary_page(request, templates, ctx, 422)
    values = balancing.option_values(options)
    try:
        pv = balancing.preview_secondary(svc, pid, tag, options)
    except EditRejected as exc:
        ctx = _secondary_context(svc.snapshot(pid), tag, values, errors=exc.by_field())
        return _secondary_page(request, templates, ctx, 422)
    return _secondary_page(request, templates, _secondary_context(pv.snapshot, tag, values, pv=pv))


@router.post(SECONDARY + "/apply", name="secondary_balance_apply", dependencies=EDIT)
def secondary_apply(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, form: FormDep):
    """Apply the previewed moves and feeder landings as one edit (409 if a panel changed since the preview)."""
    return _rearrange_secondary(request, pid, tag, svc, templates, form, balancing.ACTION_APPLY_SECONDARY)


@router.post(SECONDARY + "/undo", name="secondary_balance_undo", dependencies=EDIT)
def secondary_undo(request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, form: FormDep):
    """Put back the slots and feeder landings an apply replaced (409 if a panel changed since)."""
    return _rearrange_secondary(request, pid, tag, svc, templates, form, balancing.ACTION_UNDO_SECONDARY)


def _rearrange_secondary(
    request: Request, pid: int, tag: str, svc: ServicesDep, templates: TemplatesDep, form: dict, action: str
) -> Response:
    values = balancing.option_values(BalanceOptions())
    applying = action == balancing.ACTION_APPLY_SECONDARY

    def refused(message: str, status: int) -> Response:
        ctx = _secondary_context(svc.snapshot(pid), tag, values, message=message, error=True)
        return _secondary_page(request, templates, ctx, status)

    fingerprint = str(form.get("fingerprint") or "").strip()
    try:
        plans = balancing.parse_plan(form.get("plan"), tag)
        if not fingerprint:
            raise EditRejected([Problem("missing: preview again and apply from there", tag, field="fingerprint")])
        done = balancing.rearrange_secondary(svc, pid, tag, plans, expected_fingerprint=fingerprint, action=action)
    except balancing.SecondaryChanged as exc:
        return refused(str(exc), 409)
    except EditRejected as exc:
        what = "applied" if applying else "undone"
        return refused(f"Not {what}: " + "; ".join(p.describe() for p in exc.problems), 422)
    n, k = done.breakers_moved, done.landings_changed
    what = f"{n} breaker{'s' if n != 1 else ''} moved and {k} feeder landing{'s' if k != 1 else ''} changed"
    message = f"Balanced: {what} in one edit." if applying else f"Undone: {what} back."
    ctx = _secondary_context(done.snapshot, tag, values, message=message, done=done if applying else None)
    return _secondary_page(request, templates, ctx)
