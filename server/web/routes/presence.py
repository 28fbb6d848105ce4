"""Who else has a panel open: a small fragment the panel page polls about every 10 s (htmx)."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Request
from fastapi.responses import Response

from server.auth.accounts import UserInfo
from server.auth.permissions import Require
from server.auth.roles import Permission
from server.web.deps import TemplatesDep

router = APIRouter(tags=["presence"])
Reader = Annotated[UserInfo, Depends(Require(Permission.READ))]


@router.get("/projects/{pid}/panels/{tag}/presence", name="presence")
def presence(request: Request, pid: int, tag: str, templates: TemplatesDep, user: Reader) -> Response:
    others = request.app.state.presence.touch(f"{pid}/{tag}", user.name)
    return templates.TemplateResponse(request, "history/_presence.html", {"others": others, "pid": pid, "tag": tag})
