"""Firm settings (admin only): the defaults a new project starts with and the firm's title-block name."""

from __future__ import annotations

from dataclasses import dataclass, field

from fastapi import APIRouter, Depends, Request
from fastapi.responses import RedirectResponse, Response

from server import audit, firm
from server.auth.permissions import Require
from server.auth.roles import Permission
from server.services import EditRejected, StaleEdit
from server.web.conflicts import form_conflict_message
from server.web.deps import FormDep, ServicesDep, TemplatesDep
from server.web.templating import fmt_value
from server.web.views import CHOICES, Choices, Page

router = APIRouter(prefix="/admin/settings", tags=["firm settings"])
ADMIN = [Depends(Require(Permission.ADMIN))]
HISTORY_LIMIT = 20
#: The form's words for each setting, also used by the list of recent changes.
LABELS = {
    "firm": "Firm name",
    "paper": "Paper",
    "code": "Code edition",
    "occupancy": "Occupancy",
    "include_future": "Count future loads",
    "vd_feeder_pct": "Feeder voltage drop limit (%)",
    "vd_total_pct": "Total voltage drop limit (%)",
    "imbalance_limit_pct": "Phase imbalance limit (%)",
    "growth_margin_pct": "Growth margin for transformer sizing (%)",
}


@dataclass(frozen=True)
class FirmSettingsContext:
    """The settings form (values as typed and messages after a refusal) and the latest changes."""

    page: Page
    values: dict[str, str]
    errors: dict[str, str] = field(default_factory=dict)
    saved: bool = False
    history: list[audit.AuditLine] = field(default_factory=list)
    version: str = ""  # content version of the stored settings (409 if they change before the form is saved)
    choices: Choices = CHOICES
    labels: dict[str, str] = field(default_factory=lambda: dict(LABELS))


def _render(
    request: Request, svc: ServicesDep, templates: TemplatesDep, values=None, *, errors=None, saved=False, status=200
) -> Response:
    stored = firm.load(svc.sessions)
    if values is None:
        values = {k: fmt_value(v) for k, v in stored.items()}
    history = audit.events(svc.sessions, project_id=None, target=firm.AUDIT_TARGET, limit=HISTORY_LIMIT)
    ctx = FirmSettingsContext(Page("Firm settings"), values, errors or {}, saved, history, firm.version(stored))
    return templates.TemplateResponse(request, "firm/settings.html", {"ctx": ctx, "page": ctx.page}, status_code=status)


@router.get("", name="firm_settings", dependencies=ADMIN)
def show(request: Request, svc: ServicesDep, templates: TemplatesDep, saved: bool = False) -> Response:
    return _render(request, svc, templates, saved=saved)


@router.post("", name="firm_settings_update", dependencies=ADMIN)
def update(request: Request, svc: ServicesDep, templates: TemplatesDep, form: FormDep) -> Response:
    typed = {k: str(form.get(k) or "") for k in firm.FIELDS}
    typed["include_future"] = "yes" if form.get("include_future") else "no"
    try:
        firm.save(svc.sessions, firm.from_form(form), expected_version=form.get("version") or None, typed=typed)
    except StaleEdit as exc:  # another admin saved since this form was drawn: 409, typed values kept
        return _render(request, svc, templates, typed, errors={"": form_conflict_message(exc)}, status=409)
    except EditRejected as exc:  # nothing written: the form comes back as typed, each message beside its field
        return _render(request, svc, templates, typed, errors=exc.by_field(), status=422)
    return RedirectResponse("/admin/settings?saved=true", status_code=303)
