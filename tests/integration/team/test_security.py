"""Security of team use: the role × route table, CSRF, sessions, escaping, sign-in limits, single-user mode.

The role × route table is generated from the app's own route list (``app.routes``, flattened
through included routers): a route that declares no permission fails
:func:`test_every_route_declares_a_permission`, and each route is requested by an anonymous
browser, a reviewer, an engineer and an admin, on the demo project's ids, expecting what its
declared permission says (OWASP ASVS 4.0.3 V4.1.3 "least privilege" and V3.2.1 "new session
token on authentication", from memory; the status codes are RFC 9110 §15.5.2/15.5.4).
"""

from __future__ import annotations

import re
from datetime import UTC, datetime, timedelta

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import update

from server.auth.middleware import COOKIE
from server.auth.permissions import iter_routes, route_permission
from server.auth.roles import Permission, allows
from server.config import Settings
from server.db.models import AuthSession
from server.web.app import create_app
from tests.integration.web.conftest import TEST_PASSWORD, sign_in

ROLES = ["anonymous", "reviewer", "engineer", "admin"]


def api_routes(app):
    return [r for r in iter_routes(app.routes) if getattr(r, "dependant", None) is not None]


def _samples(app, pid: int) -> dict[str, str]:
    snap = app.state.services.snapshot(pid)
    panel = next(p for p in snap.model.panels if any(not c.feeds for c in p.circuits))
    slot = next(c.slot for c in panel.circuits if not c.feeds)
    return {
        "pid": str(pid),
        "tag": panel.tag,
        "slot": str(slot),
        "token": "no-such-upload",
        "number": "1",
        "name": "nobody",
        "circuit_id": str(app.state.services.first_circuit_id(pid)),
        "mid": "999999",
        "job_id": "no-such-job",
        "comment_id": "999999",
    }


def _url(path: str, samples: dict[str, str]) -> str:
    def fill(m: re.Match) -> str:
        name = m.group(1).split(":")[0]
        if name not in samples:
            pytest.fail(f"route {path}: add a sample value for the path parameter {{{name}}} to this test")
        return samples[name]

    return re.sub(r"\{([^}]+)\}", fill, path)


def _browser(app, role: str) -> TestClient:
    c = TestClient(app, raise_server_exceptions=False)
    if role == "anonymous":
        page = c.get("/login")  # even an anonymous browser has its (pre-sign-in) CSRF token
        c.headers["X-CSRF-Token"] = re.search(r'name="csrf_token" value="([0-9a-f]+)"', page.text).group(1)
    else:
        sign_in(c, app, role)
    return c


def test_every_route_declares_a_permission(app):
    missing = [f"{m} {r.path}" for r in api_routes(app) for m in sorted(r.methods) if route_permission(r, m) is None]
    assert not missing, "routes without Depends(Require(...)) (server.auth.permissions): " + ", ".join(missing)
    assert len(api_routes(app)) > 30  # the walk really saw the included routers


@pytest.mark.parametrize("role", ROLES)
def test_role_route_table(app, demo_id, role):
    samples = _samples(app, demo_id)
    c = _browser(app, role)
    wrong: list[str] = []
    rows = 0
    for r in api_routes(app):
        for method in sorted(r.methods - {"HEAD"}):
            needed = route_permission(r, method)
            if r.path == "/logout" and role != "anonymous":
                continue  # would sign this browser out: tested on its own below
            url = _url(r.path, samples)
            kwargs = {"json": {}} if r.path.startswith("/api/") and method != "GET" else {}
            if method not in ("GET", "HEAD") and "json" not in kwargs:
                kwargs["data"] = {"probe": "1"}
            resp = c.request(method, url, follow_redirects=False, **kwargs)
            rows += 1
            got = resp.status_code
            if got >= 500:
                wrong.append(f"{role} {method} {r.path}: {got} (server error)")
                continue
            if needed == Permission.PUBLIC:
                continue
            if role == "anonymous":
                if r.path.startswith("/api/"):
                    ok = got == 401
                else:
                    ok = got == 303 and resp.headers["location"].startswith("/login?next=")
            elif allows(role, needed):
                ok = got not in (401, 403)
            else:
                ok = got == 403
            if not ok:
                wrong.append(f"{role} {method} {r.path} (needs {needed}): got {got}")
    assert rows > 30
    assert not wrong, "\n".join(wrong)


@pytest.mark.parametrize("path", ["/docs", "/openapi.json", "/redoc"])
def test_generated_docs_need_a_session(app, path):
    anon = TestClient(app)
    assert anon.get(path, follow_redirects=False).status_code == 303
    signed = _browser(app, "reviewer")
    assert signed.get(path).status_code == 200


def test_static_files_and_login_are_public(app):
    anon = TestClient(app)
    assert anon.get("/static/panelwright.css").status_code == 200
    assert anon.get("/login").status_code == 200


def test_htmx_request_without_session_gets_401_and_a_redirect_header(app, demo_id):
    r = TestClient(app).get(f"/projects/{demo_id}/tree", headers={"HX-Request": "true"}, follow_redirects=False)
    assert r.status_code == 401
    assert r.headers["HX-Redirect"].startswith("/login?next=")


def test_reviewer_reads_compares_and_exports_but_cannot_write(app, client, demo_id):
    client.post(f"/projects/{demo_id}/revisions", data={"description": "For review"})
    rev = _browser(app, "reviewer")
    assert rev.get(f"/projects/{demo_id}/history").status_code == 200
    assert rev.get(f"/projects/{demo_id}/history.csv").status_code == 200
    assert rev.get(f"/projects/{demo_id}/revisions/compare?a=1&b=current").status_code == 200
    assert rev.post(f"/projects/{demo_id}/revisions", data={"description": "x"}).status_code == 403
    assert rev.put(f"/api/projects/{demo_id}", json={}).status_code == 403
    assert rev.get("/admin/users").status_code == 403


# --------------------------------------------------------------------------- CSRF


def _edit(c: TestClient, app, pid: int, **kw):
    s = _samples(app, pid)
    return c.post(
        f"/projects/{pid}/panels/{s['tag']}/circuits/{s['slot']}",
        data={"description": "CSRF probe", **kw.pop("data", {})},
        headers={"HX-Request": "true", "HX-Trigger-Name": "description", **kw.pop("headers", {})},
        **kw,
    )


def test_csrf_missing_or_wrong_is_refused(app, client, demo_id):
    token = client.headers.pop("X-CSRF-Token")
    try:
        assert _edit(client, app, demo_id).status_code == 403  # missing
        assert _edit(client, app, demo_id, headers={"X-CSRF-Token": "0" * 64}).status_code == 403  # wrong
        assert _edit(client, app, demo_id, data={"csrf_token": "0" * 64}).status_code == 403  # wrong form field
        assert _edit(client, app, demo_id, data={"csrf_token": token}).status_code == 200  # plain form's field
        assert _edit(client, app, demo_id, headers={"X-CSRF-Token": token}).status_code == 200  # htmx header
        assert client.put(f"/api/projects/{demo_id}", json={}).status_code == 403  # the API too
    finally:
        client.headers["X-CSRF-Token"] = token


def test_csrf_token_of_another_session_is_refused(app, client, demo_id):
    other = _browser(app, "engineer")
    theirs = other.headers["X-CSRF-Token"]
    assert theirs != client.headers["X-CSRF-Token"]
    assert _edit(client, app, demo_id, headers={"X-CSRF-Token": theirs}).status_code == 403


def test_sign_in_form_itself_needs_the_token(app):
    from server.auth.accounts import add_user

    add_user(app.state.services.sessions, name="carol", role="engineer", password=TEST_PASSWORD)
    c = TestClient(app)
    c.get("/login")
    r = c.post("/login", data={"name": "carol", "password": TEST_PASSWORD}, follow_redirects=False)
    assert r.status_code == 403


def test_page_carries_the_token_for_htmx_and_forms(app, client, demo_id):
    page = client.get(f"/projects/{demo_id}/settings").text
    token = client.headers["X-CSRF-Token"]
    assert f'<meta name="csrf-token" content="{token}">' in page
    assert re.search(r"<body hx-headers='\{\"X-CSRF-Token\": \"" + token + "\"\\}'>", page)
    assert f'name="csrf_token" value="{token}"' in page  # the sign-out form


# --------------------------------------------------------------------------- sessions


def test_new_session_id_after_sign_in_and_old_one_is_useless(app):
    from server.auth.accounts import add_user

    add_user(app.state.services.sessions, name="dave", role="engineer", password=TEST_PASSWORD)
    c = TestClient(app)
    page = c.get("/login")
    before = c.cookies.get(COOKIE)
    assert before
    token = re.search(r'name="csrf_token" value="([0-9a-f]+)"', page.text).group(1)
    r = c.post("/login", data={"name": "dave", "password": TEST_PASSWORD, "csrf_token": token}, follow_redirects=False)
    assert r.status_code == 303
    cookie = r.headers["set-cookie"]
    assert "HttpOnly" in cookie and "SameSite=Lax" in cookie and "Max-Age=" in cookie
    after = c.cookies.get(COOKIE)
    assert after and after != before
    assert c.get("/", follow_redirects=False).status_code == 200
    # An attacker who planted (or saw) the pre-sign-in cookie gets nothing from it.
    attacker = TestClient(app, cookies={COOKIE: before})
    assert attacker.get("/", follow_redirects=False).status_code == 303
    # Signing out ends the session on the server: a copy of the cookie no longer works.
    copy = TestClient(app, cookies={COOKIE: after})
    assert copy.get("/", follow_redirects=False).status_code == 200
    c.headers["X-CSRF-Token"] = re.search(r'<meta name="csrf-token" content="([0-9a-f]+)"', c.get("/").text).group(1)
    assert c.post("/logout", follow_redirects=False).status_code == 303
    assert copy.get("/", follow_redirects=False).status_code == 303


def test_expired_session_is_refused(app, client):
    assert client.get("/", follow_redirects=False).status_code == 200
    with app.state.services.sessions() as s, s.begin():
        s.execute(update(AuthSession).values(expires_at=datetime.now(UTC) - timedelta(seconds=1)))
    r = client.get("/", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/login")


def test_tampered_cookie_is_anonymous(app, client):
    value = client.cookies.get(COOKIE)
    forged = TestClient(app, cookies={COOKIE: value[:-2] + ("AA" if not value.endswith("AA") else "BB")})
    assert forged.get("/", follow_redirects=False).status_code == 303


def test_open_redirect_after_sign_in_is_refused(app):
    from server.auth.accounts import add_user

    add_user(app.state.services.sessions, name="erin", role="engineer", password=TEST_PASSWORD)
    c = TestClient(app)
    token = re.search(r'name="csrf_token" value="([0-9a-f]+)"', c.get("/login").text).group(1)
    for target in ("//elsewhere.example/", "https://elsewhere.example/", "/\\elsewhere.example"):
        r = c.post(
            "/login",
            data={"name": "erin", "password": TEST_PASSWORD, "csrf_token": token, "next": target},
            follow_redirects=False,
        )
        assert r.headers["location"] == "/"
        token = re.search(r'<meta name="csrf-token" content="([0-9a-f]+)"', c.get("/").text).group(1)


# --------------------------------------------------------------------------- sign-in limits


def _try(c: TestClient, name: str, password: str) -> int:
    token = re.search(r'name="csrf_token" value="([0-9a-f]+)"', c.get("/login").text).group(1)
    return c.post(
        "/login", data={"name": name, "password": password, "csrf_token": token}, follow_redirects=False
    ).status_code


def test_sign_in_is_limited_per_user(app):
    from server.auth.accounts import add_user

    add_user(app.state.services.sessions, name="frank", role="engineer", password=TEST_PASSWORD)
    limit = app.state.settings.login_max_failures
    c = TestClient(app)
    for _ in range(limit):
        assert _try(c, "frank", "wrong-password") == 401
    assert _try(c, "frank", TEST_PASSWORD) == 429  # even the right password waits now
    r = c.post("/login", data={}, follow_redirects=False)
    assert r.status_code in (403, 429)


def test_sign_in_is_limited_per_address(app):
    from server.auth.ratelimit import ADDRESS_FACTOR

    limit = app.state.settings.login_max_failures * ADDRESS_FACTOR
    c = TestClient(app)
    for i in range(limit):
        assert _try(c, f"nobody{i}", "wrong-password") == 401
    assert _try(c, "someone-new", "wrong-password") == 429


def test_wrong_password_message_does_not_say_which_part_was_wrong(app):
    from server.auth.accounts import add_user

    add_user(app.state.services.sessions, name="gina", role="engineer", password=TEST_PASSWORD)
    c = TestClient(app)
    token = re.search(r'name="csrf_token" value="([0-9a-f]+)"', c.get("/login").text).group(1)
    a = c.post("/login", data={"name": "gina", "password": "nope-nope", "csrf_token": token}).text
    b = c.post("/login", data={"name": "no-such-user", "password": "nope-nope", "csrf_token": token}).text
    assert "Wrong user name or password." in a and "Wrong user name or password." in b


def test_password_is_stored_hashed_with_argon2(app):
    from sqlalchemy import select

    from server.auth.accounts import add_user
    from server.db.models import User

    add_user(app.state.services.sessions, name="hank", role="reviewer", password=TEST_PASSWORD)
    with app.state.services.sessions() as s:
        stored = s.scalar(select(User.password_hash).where(User.name == "hank"))
    assert stored.startswith("$argon2id$") and TEST_PASSWORD not in stored


# --------------------------------------------------------------------------- escaping

XSS = '<script>alert("pw")</script><img src=x onerror=alert(1)>'


def test_typed_text_comes_back_escaped_everywhere(app, client, demo_id):
    s = _samples(app, demo_id)
    pid, tag, slot = demo_id, s["tag"], s["slot"]
    snap = app.state.services.snapshot(pid)
    xf = snap.model.transformers[0].tag
    client.follow_redirects = False  # the writes answer 303; the pages are read below
    assert client.post(
        f"/projects/{pid}/panels/{tag}/circuits/{slot}", data={"description": XSS, "notes": XSS}
    ).status_code in (200, 303)
    assert (
        client.post(
            f"/projects/{pid}/panels/{tag}", data={"description": XSS, "location": XSS, "mounting": XSS}
        ).status_code
        == 303
    )
    assert (
        client.post(
            f"/projects/{pid}/transformers/{xf}", data={"description": XSS, "location": XSS}, follow_redirects=False
        ).status_code
        == 303
    )
    settings = {k: v for k, v in _settings_values(app, pid).items()}
    settings.update(name=XSS, client=XSS, address=XSS[:300], firm=XSS)
    assert client.post(f"/projects/{pid}/settings", data=settings, follow_redirects=False).status_code == 303
    assert (
        client.post(f"/projects/{pid}/revisions", data={"description": XSS}, follow_redirects=False).status_code == 303
    )
    pages = [
        "/",
        f"/projects/{pid}/tree",
        f"/projects/{pid}/panels/{tag}",
        f"/projects/{pid}/transformers",
        f"/projects/{pid}/transformers/{xf}",
        f"/projects/{pid}/settings",
        f"/projects/{pid}/warnings",
        f"/projects/{pid}/history",
        f"/projects/{pid}/panels/{tag}/history",
        f"/projects/{pid}/revisions",
        f"/projects/{pid}/revisions/1",
        f"/projects/{pid}/revisions/compare?a=1&b=current",
    ]
    client.follow_redirects = True
    for path in pages:
        r = client.get(path)
        assert r.status_code == 200, path
        assert "<script>alert(" not in r.text and "<img src=x" not in r.text, f"{path} echoes markup unescaped"
    assert "&lt;script&gt;alert(" in client.get(f"/projects/{pid}/panels/{tag}").text
    assert "&lt;script&gt;alert(" in client.get(f"/projects/{pid}/history").text
    # A user name cannot carry markup at all.
    admin = _browser(app, "admin")
    r = admin.post("/admin/users", data={"name": "<b>x</b>", "role": "reviewer", "password": TEST_PASSWORD})
    assert r.status_code == 422 and "<b>x</b>" not in r.text and "&lt;b&gt;x&lt;/b&gt;" in r.text


def _settings_values(app, pid: int) -> dict[str, str]:
    from server.web.views import settings_values

    return settings_values(app.state.services.snapshot(pid))


def test_typed_markup_is_plain_text_in_the_pdf(app, demo_id):
    pytest.importorskip("weasyprint")
    from pypdf import PdfReader

    from server.pdf.issue import make_set

    s = _samples(app, demo_id)
    svc = app.state.services
    svc.edit_circuit(demo_id, s["tag"], int(s["slot"]), {"description": "<b>bold?</b> & <i>x</i>"})
    snap = svc.snapshot(demo_id)
    pdf, _ = make_set(snap.model, snap.result, select=[s["tag"]])
    import io

    text = " ".join(page.extract_text() for page in PdfReader(io.BytesIO(pdf)).pages)
    assert "<b>bold?</b> & <i>x</i>" in text


# --------------------------------------------------------------------------- single-user mode


def test_single_user_mode_needs_no_sign_in_on_loopback_and_refuses_others(db_url):
    app = create_app(Settings(database_url=db_url, single_user=True))
    try:
        local = TestClient(app)
        page = local.get("/")
        assert page.status_code == 200 and "local" in page.text
        token = re.search(r'<meta name="csrf-token" content="([0-9a-f]+)"', page.text).group(1)
        assert local.post("/projects", data={"name": "Solo job"}).status_code == 403  # CSRF still applies
        assert (
            local.post("/projects", data={"name": "Solo job", "csrf_token": token}, follow_redirects=False).status_code
            == 303
        )
        remote = TestClient(app, client=("192.0.2.10", 50000))  # TEST-NET-1 (RFC 5737): never a real host
        assert remote.get("/").status_code == 403
    finally:
        app.state.engine.dispose()


def test_serve_refuses_single_user_on_a_lan_address():
    from click.testing import CliRunner

    from server.cli import cli

    result = CliRunner().invoke(cli, ["serve", "--single-user", "--host", "0.0.0.0"])
    assert result.exit_code == 2
    assert "--single-user serves this machine only" in result.output


def test_first_run_page_only_on_the_server_and_only_once(app):
    remote = TestClient(app, client=("192.0.2.10", 50000))  # TEST-NET-1 (RFC 5737)
    assert remote.get("/setup").status_code == 403
    local = TestClient(app)
    page = local.get("/setup")
    assert page.status_code == 200
    token = re.search(r'name="csrf_token" value="([0-9a-f]+)"', page.text).group(1)
    r = local.post(
        "/setup",
        data={"name": "owner", "password": TEST_PASSWORD, "password2": TEST_PASSWORD, "csrf_token": token},
        follow_redirects=False,
    )
    assert r.status_code == 303
    home = local.get("/")
    assert home.status_code == 200 and "owner" in home.text and "(admin)" in home.text
    again = TestClient(app).get("/setup")
    assert again.status_code == 403 and "already exists" in again.text


def test_reviewer_sees_a_read_only_panel_editor(app, client, demo_id):
    # The screen does not offer what the role cannot do: no balance button, every box disabled.
    tag = _samples(app, demo_id)["tag"]
    page = _browser(app, "reviewer").get(f"/projects/{demo_id}/panels/{tag}")
    assert page.status_code == 200
    assert 'id="balance-open"' not in page.text and 'id="read-only-note"' in page.text
    assert re.search(r'<fieldset class="grid-set" id="grid-set" disabled>', page.text)
    page = _browser(app, "engineer").get(f"/projects/{demo_id}/panels/{tag}")
    assert 'id="balance-open"' in page.text and 'id="read-only-note"' not in page.text
    assert re.search(r'<fieldset class="grid-set" id="grid-set">', page.text)


def test_reviewer_screens_offer_no_changes(app, client, demo_id):
    rev, eng = _browser(app, "reviewer"), _browser(app, "engineer")
    tx = app.state.services.snapshot(demo_id).model.transformers[0].tag
    checks = [
        ("/", 'id="new-project"'),
        (f"/projects/{demo_id}/tree", 'id="add-node"'),
        (f"/projects/{demo_id}/tree", "/move"),
    ]
    for url, marker in checks:
        assert marker not in rev.get(url).text, (url, marker)
        assert marker in eng.get(url).text, (url, marker)
    for url in (f"/projects/{demo_id}/settings", f"/projects/{demo_id}/transformers/{tx}"):
        assert re.search(r'<fieldset class="grid-set" disabled>', rev.get(url).text), url
        assert re.search(r'<fieldset class="grid-set">', eng.get(url).text), url
