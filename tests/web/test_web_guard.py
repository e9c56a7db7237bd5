"""Who may use the operator page: the station token off loopback, no cross-site changes."""

from __future__ import annotations

import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer

import pytest
from web_support import http, origin, page_keys

from benchgate.web.guard import CSRF_HEADER, Guard, needs_token


def test_only_loopback_listens_without_a_token():
    for host in ("127.0.0.1", "::1", "[::1]", "localhost"):
        assert not needs_token(host)
    for host in ("127.0.0.2", "0.0.0.0", "192.168.1.20", "::"):
        assert needs_token(host)
    with pytest.raises(ValueError, match="needs a station token"):
        Guard("127.0.0.2", 8765, token=None)


def test_origin_must_be_the_page_itself():
    g = Guard("127.0.0.1", 8765)
    assert g.origin_ok("http://127.0.0.1:8765", "127.0.0.1:8765", "same-origin")
    assert g.origin_ok("http://127.0.0.1:8765", "127.0.0.1:8765", None)  # an older browser
    assert not g.origin_ok(None, "127.0.0.1:8765", None)
    assert not g.origin_ok("http://evil.example", "127.0.0.1:8765", None)
    assert not g.origin_ok("http://127.0.0.1:8765", "127.0.0.1:8765", "cross-site")
    assert not g.origin_ok("http://127.0.0.1:8765", "127.0.0.1:8765", "same-site")
    assert g.host_ok("localhost:8765") and not g.host_ok("evil.example:8765") and not g.host_ok(None)


@pytest.mark.browser
def test_a_non_loopback_listener_refuses_everything_without_the_token(serve_page, context, shot):
    served = serve_page(host="127.0.0.2", token="owl-hollow-7")
    assert served.url.startswith("http://127.0.0.2:")
    status, headers, _ = http(served.url)
    assert status == 303 and headers["location"] == "/login"
    for path in ("api/state", "events", "reports/results.sqlite"):
        assert http(served.url + path)[0] == 401, path
    csrf = served.thread.server.config.app.guard.csrf  # even knowing the page's anti-forgery token
    status, _, _ = http(served.url + "api/stop", "POST", {"Origin": origin(served.url), CSRF_HEADER: csrf,
                                                          "Content-Type": "application/json"}, b"{}")
    assert status == 401
    assert served.desk.board.get("supply")["state"] != "stopping"

    page = context.new_page()
    page.goto(served.url)
    assert page.url == served.url + "login"
    shot(page, "1-token-asked")
    page.fill("#token", "owl-hollow-8")
    page.press("#token", "Enter")
    page.wait_for_selector(".login-error")
    assert "not this station's token" in page.text_content(".login-error")
    page.fill("#token", "owl-hollow-7")
    page.press("#token", "Enter")
    page.wait_for_selector('body[data-phase="idle"]')
    page.wait_for_selector('#supply[data-state="off"]')  # the live stream works with the token's cookie
    page.goto(served.url)  # asked once: the browser keeps it
    page.wait_for_selector('body[data-phase="idle"]')


@pytest.mark.browser
def test_loopback_answers_only_to_its_own_name(serve_page):
    served = serve_page()
    assert http(served.url)[0] == 200
    port = served.url.rsplit(":", 1)[1].strip("/")
    assert http(served.url, headers={"Host": f"localhost:{port}"})[0] == 200
    # a hostile site that rebinds its own name to 127.0.0.1 is not this page
    assert http(served.url, headers={"Host": f"evil.example:{port}"})[0] == 421


@pytest.fixture
def hostile_server():
    servers = []

    def start(html: str) -> str:
        body = html.encode()

        class Handler(BaseHTTPRequestHandler):
            def do_GET(self):
                self.send_response(200)
                self.send_header("Content-Type", "text/html")
                self.send_header("Content-Length", str(len(body)))
                self.end_headers()
                self.wfile.write(body)

            def log_message(self, *args):
                pass

        server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        threading.Thread(target=server.serve_forever, daemon=True).start()
        servers.append(server)
        return f"http://127.0.0.1:{server.server_address[1]}/"

    yield start
    for server in servers:
        server.shutdown()
        server.server_close()


@pytest.mark.browser
def test_forged_cross_site_requests_are_refused(serve_page, context, hostile_server):
    served = serve_page()
    page = context.new_page()
    page.goto(served.url)  # the operator's browser has the page open (and its cookie)
    page.wait_for_selector('body[data-phase="idle"]')

    evil_html = f"""<!doctype html><html><body>
    <iframe name="sink"></iframe>
    <form id="stop" method="POST" action="{served.url}api/stop" target="sink"></form>
    <form id="scan" method="POST" action="{served.url}api/scan" enctype="text/plain">
      <input name='{{"serial": "EVIL-1", "x": "' value='"}}'>
    </form>
    <script>
      document.getElementById("stop").submit();
      setTimeout(() => document.getElementById("scan").submit(), 0);
    </script></body></html>"""
    # a hostile page from another web server on this machine (another port: another origin, and
    # the same site, so the browser even sends the page's SameSite cookies along)
    evil_url = hostile_server(evil_html)
    evil = context.new_page()
    statuses = {}
    context.on("response", lambda r: statuses.__setitem__(r.url.rsplit("/", 1)[1], r.status)
               if r.url.startswith(served.url + "api/") else None)
    with evil.expect_response(served.url + "api/stop"), evil.expect_response(served.url + "api/scan"):
        evil.goto(evil_url)
    assert statuses == {"stop": 403, "scan": 403}
    assert served.desk.board.get("phase") == "idle" and served.desk.board.get("serial") is None
    assert served.desk.board.get("supply")["state"] == "off"  # the forged Stop changed nothing
    assert served.rows("EVIL-1") == []

    # the same without a browser: each missing piece alone is refused, all present is accepted
    csrf, cookie = page_keys(served.url)
    good = {"Origin": origin(served.url), CSRF_HEADER: csrf, "Cookie": cookie, "Content-Type": "application/json"}
    for drop in ("Origin", CSRF_HEADER):
        headers = {k: v for k, v in good.items() if k != drop}
        assert http(served.url + "api/session", "POST", headers, b"{}")[0] == 403, drop
    assert http(served.url + "api/session", "POST", {**good, "Sec-Fetch-Site": "cross-site"}, b"{}")[0] == 403
    assert http(served.url + "api/session", "POST", {**good, "Origin": "http://evil.example"}, b"{}")[0] == 403
    assert http(served.url + "api/session", "POST", good, b"{}")[0] == 202

    # the report folder is served read only, and only its report files (not the database)
    served.desk.wait_idle(10)
    served.reports.mkdir(parents=True, exist_ok=True)
    (served.reports / "note.json").write_text("{}", encoding="utf-8")
    (served.reports / "results.sqlite").write_bytes(b"SQLite format 3\x00")
    assert http(served.url + "reports/note.json")[0] == 200
    assert http(served.url + "reports/results.sqlite")[0] == 404
    assert http(served.url + "reports/../pyproject.toml")[0] == 404
    assert http(served.url + "reports/note.json", "POST", good, b"{}")[0] == 405
