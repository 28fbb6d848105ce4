"""Content versions of the elements edited by whole forms: a panel's header, a transformer, the project.

Circuits carry a ``version`` column (:class:`server.db.models.Circuit`), bumped on every write.
Panel headers, transformers and the project settings are edited through whole forms, and their
rows are rewritten from the validated project file; their version is the SHA-256 (first 16 hex
digits) of their canonical version-1 fields (circuits left out of a panel's).  Any change by
anyone changes it, and a form posted with an older one is refused with 409
(:class:`server.services.StaleEdit`) instead of silently undoing the other person's change.

The form carries the version of what it showed (hidden ``version`` input); the service checks
it against the project as read inside its write loop, whose ``data_version`` claim makes the
check and the write one atomic step.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import fields
from enum import StrEnum
from typing import Any


def plain(value: Any) -> Any:
    """A model object as the canonical version-1 JSON value (the rules of ``projectfile.dump_project``)."""
    if isinstance(value, StrEnum):
        return value.value
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return int(value)
    if isinstance(value, tuple | list):
        return [plain(v) for v in value]
    if hasattr(value, "__dataclass_fields__"):
        return {f.name: plain(getattr(value, f.name)) for f in fields(value)}
    if isinstance(value, dict):
        return {k: plain(v) for k, v in value.items()}
    return value


#: Optional fields the canonical file leaves out at their default (projectfile.dump_project): a
#: version must not depend on whether the element came from the file or from the model.
_OMITTED_AT_DEFAULT = {"feeder_rotation": 0}


def of_plain(element: dict[str, Any]) -> str:
    body = {k: v for k, v in element.items() if k != "circuits"}
    for name, default in _OMITTED_AT_DEFAULT.items():
        if body.get(name, default) == default:
            body.pop(name, None)
    return hashlib.sha256(json.dumps(body, sort_keys=True, default=str).encode("utf-8")).hexdigest()[:16]


def content_version(obj: Any) -> str:
    """The version of a model object (Panel, Transformer, ProjectInfo) as a form carries it."""
    return of_plain(plain(obj))


def flat(element: dict[str, Any]) -> dict[str, Any]:
    """Form-shaped values of an element: top-level fields and ``feeder_<name>``, circuits left out."""
    out = {k: v for k, v in element.items() if k not in ("circuits", "feeder")}
    for k, v in (element.get("feeder") or {}).items():
        out[f"feeder_{k}"] = v
    return out
