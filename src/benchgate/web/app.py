"""The operator page's web application (Starlette, ASGI).

``GET /`` the page; ``GET /events`` its live state as server-sent events (``state`` and
``wave``); ``POST /api/...`` what a page may ask of the station (scan, answer, stop, retest,
plan, session); ``/static`` the page's own assets (shipped in the package: the page works with
no internet); ``/reports`` the report folder, read only. Access rules: :mod:`benchgate.web.guard`.
"""

from __future__ import annotations

import asyncio
import json
import secrets
from contextlib import asynccontextmanager
from pathlib import Path
from typing import Any
from urllib.parse import parse_qs

from jinja2 import Environment, PackageLoader, select_autoescape
from starlette.applications import Starlette
from starlette.requests import Request
from starlette.responses import (
    HTMLResponse,
    JSONResponse,
    RedirectResponse,
    Response,
    StreamingResponse,
)
from starlette.routing import Mount, Route
from starlette.staticfiles import StaticFiles

from benchgate.web.desk import Desk
from benchgate.web.guard import CLIENT_COOKIE, CSRF_HEADER, SAFE_METHODS, STATION_COOKIE, Guard

HERE = Path(__file__).resolve().parent
MAX_BODY = 4096
#: a quiet event stream sends a comment this often (s) so proxies and browsers keep it open
KEEPALIVE_S = 15.0

PAGE_CSP = ("default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
            "connect-src 'self'; form-action 'self'; frame-ancestors 'none'; base-uri 'none'")
REPORT_CSP = ("default-src 'none'; style-src 'unsafe-inline'; img-src 'self' data:; "
              "frame-ancestors 'none'; base-uri 'none'; form-action 'none'")

_templates = Environment(loader=PackageLoader("benchgate.web", "templates"),
                         autoescape=select_autoescape(default=True, default_for_string=True))


class ReportFiles(StaticFiles):
    """The report folder, read only, and only the evidence a report links to (not the database)."""

    SUFFIXES = frozenset({".html", ".json", ".npz", ".csv", ".wav", ".xml", ".pdf", ".svg", ".png"})

    async def get_response(self, path: str, scope: dict) -> Response:
        if Path(path).suffix.lower() not in self.SUFFIXES:
            return Response("not a report file\n", status_code=404, media_type="text/plain")
        return await super().get_response(path, scope)


class GuardMiddleware:
    """Host, token and cross-site checks before anything else; security headers on every reply."""

    def __init__(self, app: Any, guard: Guard):
        self.app = app
        self.guard = guard

    async def __call__(self, scope: dict, receive: Any, send: Any) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        request = Request(scope)
        refusal = self.refusal(request)
        path = scope.get("path", "")
        csp = REPORT_CSP if path.startswith("/reports/") else PAGE_CSP

        async def send_with_headers(message: dict) -> None:
            if message["type"] == "http.response.start":
                headers = list(message.get("headers", []))
                for k, v in (("content-security-policy", csp), ("x-content-type-options", "nosniff"),
                             ("x-frame-options", "DENY"), ("referrer-policy", "same-origin"),
                             ("cache-control", "no-store")):
                    if not any(h[0].lower() == k.encode() for h in headers):
                        headers.append((k.encode(), v.encode()))
                message = {**message, "headers": headers}
            await send(message)

        if refusal is not None:
            await refusal(scope, receive, send_with_headers)
            return
        await self.app(scope, receive, send_with_headers)

    def refusal(self, request: Request) -> Response | None:
        g = self.guard
        host = request.headers.get("host")
        if not g.host_ok(host):
            return Response("refused: this page answers only at its own address (Host header)\n",
                            status_code=421, media_type="text/plain")
        path = request.url.path
        if request.method not in SAFE_METHODS:
            if not g.origin_ok(request.headers.get("origin"), host, request.headers.get("sec-fetch-site")):
                return Response("refused: a change must come from the operator page itself\n",
                                status_code=403, media_type="text/plain")
            if path.startswith("/api/") and not g.csrf_ok(request.headers.get(CSRF_HEADER)):
                return Response("refused: missing or wrong anti-forgery token (reload the page)\n",
                                status_code=403, media_type="text/plain")
        if path in ("/login", "/favicon.ico") or path.startswith("/static/"):
            return None
        if not g.authorised(request.cookies.get(STATION_COOKIE)):
            if request.method in SAFE_METHODS and path == "/":
                return RedirectResponse("/login", status_code=303)
            return Response("refused: this station needs its token (open the page and enter it)\n",
                            status_code=401, media_type="text/plain")
        return None


def _cookie(response: Response, name: str, value: str) -> None:
    response.set_cookie(name, value, httponly=True, samesite="strict", path="/", max_age=30 * 86400)


def create_app(desk: Desk, guard: Guard, *, reports_dir: Path, own_desk: bool = True) -> Any:
    """The ASGI app for ``desk``; with ``own_desk`` the app's shutdown also shuts the desk down."""

    def client_of(request: Request) -> str | None:
        cookie = request.cookies.get(CLIENT_COOKIE)
        return None if not cookie else guard.client_tag(cookie)

    async def page(request: Request) -> Response:
        cookie = request.cookies.get(CLIENT_COOKIE) or secrets.token_urlsafe(18)
        html = _templates.get_template("page.html").render(
            csrf=guard.csrf, tag=guard.client_tag(cookie), station=desk.station.id,
            token_required=guard.token_required)
        response = HTMLResponse(html)
        _cookie(response, CLIENT_COOKIE, cookie)
        return response

    async def login(request: Request) -> Response:
        error = None
        if request.method == "POST":
            raw = await request.body()
            form = parse_qs(raw[:MAX_BODY].decode("utf-8", "replace"))
            if guard.token_ok((form.get("token") or [""])[0]):
                response = RedirectResponse("/", status_code=303)
                _cookie(response, STATION_COOKIE, guard.station_cookie())
                return response
            error = "That is not this station's token."
        if not guard.token_required:
            return RedirectResponse("/", status_code=303)
        html = _templates.get_template("login.html").render(station=desk.station.id, error=error)
        return HTMLResponse(html, status_code=401 if error else 200)

    async def icon(request: Request) -> Response:
        return Response((HERE / "static" / "icon.svg").read_bytes(), media_type="image/svg+xml")

    async def state(request: Request) -> Response:
        _, text = desk.board.snapshot()
        return Response(text, media_type="application/json")

    async def events(request: Request) -> Response:
        loop = asyncio.get_running_loop()
        wake = asyncio.Event()
        sub = desk.board.subscribe(loop, wake)

        async def stream():
            try:
                yield "retry: 1000\n\n"
                seen = seen_wave = -1
                while True:
                    wake.clear()
                    version, text = desk.board.snapshot()
                    if version != seen:
                        seen = version
                        yield f"id: {version}\nevent: state\ndata: {text}\n\n"
                    wave_version, wave = desk.board.wave()
                    if wave_version != seen_wave:
                        seen_wave = wave_version
                        yield f"event: wave\ndata: {wave}\n\n"
                    if desk.closing and desk.board.get("closing"):
                        yield "event: closing\ndata: {}\n\n"
                        return
                    try:
                        await asyncio.wait_for(wake.wait(), KEEPALIVE_S)
                    except TimeoutError:
                        yield ": still here\n\n"
            finally:
                desk.board.unsubscribe(sub)

        return StreamingResponse(stream(), media_type="text/event-stream",
                                 headers={"X-Accel-Buffering": "no"})

    async def body_of(request: Request) -> dict[str, Any]:
        raw = await request.body()
        if len(raw) > MAX_BODY:
            raise ValueError("request too large")
        data = json.loads(raw or b"{}")
        if not isinstance(data, dict):
            raise ValueError("expected a JSON object")
        return data

    def reply(result: tuple[int, str]) -> Response:
        status, message = result
        return JSONResponse({"ok": status < 400, "message": message}, status_code=status)

    async def api(request: Request) -> Response:
        action = request.path_params["action"]
        client = client_of(request)
        if client is None:
            return reply((403, "this screen has no identity: reload the page"))
        try:
            data = await body_of(request)
        except (ValueError, UnicodeDecodeError):
            return reply((400, "the request was not understood"))
        if action == "stop":
            return reply(desk.stop())
        if action == "scan":
            return reply(desk.scan(str(data.get("serial", "")), client))
        if action == "retest":
            return reply(desk.retest(client))
        if action == "answer":
            try:
                ask_id = int(data.get("ask"))
            except (TypeError, ValueError):
                return reply((400, "which question?"))
            return reply(desk.answer(ask_id, str(data.get("answer", ""))[:200], client))
        if action == "plan":
            return reply(desk.choose_plan(str(data.get("name", "")), client))
        if action == "session":
            return reply(desk.new_session(client))
        return reply((404, "no such action"))

    @asynccontextmanager
    async def lifespan(app: Any):
        yield
        if own_desk:
            await asyncio.to_thread(desk.shutdown)

    reports = Path(reports_dir)
    routes = [
        Route("/", page),
        Route("/login", login, methods=["GET", "POST"]),
        Route("/favicon.ico", icon),
        Route("/api/state", state),
        Route("/events", events),
        Route("/api/{action}", api, methods=["POST"]),
        Mount("/static", StaticFiles(directory=HERE / "static"), name="static"),
        Mount("/reports", ReportFiles(directory=reports, check_dir=False), name="reports"),
    ]
    app = Starlette(routes=routes, lifespan=lifespan)
    return GuardMiddleware(app, guard)
