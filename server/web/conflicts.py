"""The answer to a stale circuit edit (409): the other person's value beside the user's, and a choice.

The grid sends the ``Circuit.version`` it shows with every edit.  When someone else saved the
circuit since, :class:`server.services.StaleEdit` refuses the write; this module answers with:

* the circuit's cells re-rendered with what is stored now, except the field being edited,
  which keeps what the user typed (nothing typed is thrown away) and is marked;
* the row version updated, so the next save is based on what is now stored;
* a notice above the grid naming who changed it, with "Keep mine" (save the typed value
  over theirs) and "Use theirs" buttons for each field whose stored value differs.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from fastapi import Request
from fastapi.responses import HTMLResponse, Response

from server.services import CIRCUIT_FORM_FIELDS, StaleEdit
from server.web.templating import fmt_value
from server.web.views import panel_context


def expected_version(form: dict[str, Any]) -> int | None:
    """The version the page showed (the hidden ``version`` field), or None when absent."""
    text = str(form.get("version") or "").strip()
    return int(text) if text.isdigit() else None


def _shown(name: str, value: Any) -> str:
    if name == "continuous":
        return "" if value is None else ("yes" if value else "no")
    return fmt_value(value)


@dataclass(frozen=True)
class FieldChoice:
    """One field where what is stored now differs from what the user's page sent."""

    name: str
    theirs: str
    yours: str
    typed: bool  # True for the field the user was editing; False for a value their page merely showed


def choices(exc: StaleEdit, trigger: str | None) -> list[FieldChoice]:
    out = []
    for name in CIRCUIT_FORM_FIELDS:
        if name not in exc.typed:
            continue
        theirs = _shown(name, exc.current.get(name))
        yours = str(exc.typed.get(name) or "").strip()
        if theirs != yours:
            out.append(FieldChoice(name, theirs, yours, trigger is None or name == trigger))
    out.sort(key=lambda c: not c.typed)
    return out


def conflict_response(
    request: Request,
    svc: Any,
    templates: Any,
    htmx: bool,
    pid: int,
    tag: str,
    slot: int,
    exc: StaleEdit,
    trigger: str | None,
) -> Response:
    from server.web.routes.panels import _checked, _edit_response

    snap = _checked(svc.snapshot(pid), tag)
    picks = choices(exc, trigger)
    kept = {c.name: c.yours for c in picks if c.typed}
    message = f"changed by {exc.changed_by} meanwhile; stored now: "
    errors = {c.name: message + (c.theirs or "(empty)") for c in picks if c.typed}
    ctx = panel_context(snap, tag, override_slot=slot, override_values=kept, errors=errors)
    if not htmx:
        return templates.TemplateResponse(
            request, "panels/detail.html", {"ctx": ctx, "page": ctx.page}, status_code=409
        )
    flash = f"Circuit {slot} not saved: {exc.changed_by} changed it while you were editing."
    base = _edit_response(
        request,
        templates,
        snap,
        tag,
        slot,
        trigger,
        False,
        flash,
        ctx=ctx,
        error_fields=[c.name for c in picks] or list(CIRCUIT_FORM_FIELDS),
        status_code=409,
    )
    notice = templates.get_template("panels/_conflict.html").render(
        request=request, ctx=ctx, exc=exc, picks=picks, slot=slot, version=exc.version
    )
    return HTMLResponse(bytes(base.body) + notice.encode("utf-8"), status_code=409)


def form_conflict_message(exc: StaleEdit) -> str:
    """The notice of a whole-element form (panel header, transformer, settings) refused with 409.

    The form is shown again with the user's values kept and the version now stored, so saving
    again puts the user's values over the other person's (keep mine), and reloading the page
    shows theirs (use theirs).
    """
    differ = []
    for name, value in exc.current.items():
        if name not in exc.typed:
            continue
        theirs = _shown(name, value)
        yours = str(exc.typed.get(name) or "").strip()
        if theirs != yours:
            differ.append(f"{name}: {theirs or '(empty)'}")
    stored = "; ".join(differ) if differ else "(no difference in the fields of this form)"
    return (
        f"{exc.target} was changed by {exc.changed_by} while you were editing; nothing was saved. "
        f"Stored now: {stored}. Your values are kept below: save again to keep yours, or reload the page to take theirs."
    )
