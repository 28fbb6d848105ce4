"""server.growth pieces that need no database: the what-if form and the held-upload store."""

from __future__ import annotations

import pytest

from server.calc.model import Category
from server.growth import Growth, MeteredRefused, _Held
from server.services import EditRejected


def _parse(form: dict):
    return Growth(services=None).parse_added_load("LP-1", form)  # type: ignore[arg-type]


def test_whatif_form_parses_to_an_added_load() -> None:
    req = _parse({"kva": "2.5", "category": "receptacle", "poles": "1", "pf": "0.95", "continuous": "no", "slot": "7"})
    assert req.load_va == 2_500.0 and req.category == Category.RECEPTACLE and req.poles == 1
    assert req.pf == 0.95 and req.continuous is False and req.slot == 7
    assert _parse({"kva": "1", "category": "motor", "poles": "3"}).slot is None


@pytest.mark.parametrize(
    ("form", "field"),
    [
        ({"kva": "", "category": "equipment", "poles": "1"}, "kva"),
        ({"kva": "-3", "category": "equipment", "poles": "1"}, "kva"),
        ({"kva": "nan", "category": "equipment", "poles": "1"}, "kva"),
        ({"kva": "1", "category": "toaster", "poles": "1"}, "category"),
        ({"kva": "1", "category": "equipment", "poles": "4"}, "poles"),
        ({"kva": "1", "category": "equipment", "poles": "1", "slot": "2.5"}, "slot"),
        ({"kva": "1", "category": "equipment", "poles": "1", "pf": "x"}, "pf"),
    ],
)
def test_whatif_form_errors_name_the_field(form: dict, field: str) -> None:
    with pytest.raises(EditRejected) as err:
        _parse(form)
    assert field in err.value.by_field()


def test_held_upload_is_bound_to_its_project_and_token(tmp_path) -> None:
    held = _Held(tmp_path)
    token = held.save(3, "../../etc/meter.csv", b"timestamp,kVA\n")
    path, name = held.load(3, token)
    assert path.parent == tmp_path and name == "meter.csv"  # only the file's own name is kept
    with pytest.raises(MeteredRefused):
        held.load(4, token)  # another project
    for bad in ("../" + token, "x", token + "/.."):
        with pytest.raises(MeteredRefused):
            held.load(3, bad)
    held.discard(token)
    with pytest.raises(MeteredRefused):
        held.load(3, token)  # used once
