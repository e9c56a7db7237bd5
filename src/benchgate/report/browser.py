"""Reports in a real browser: the system's headless Chromium, driven by Playwright for Python.

Playwright's own browser downloads are never used: the browser is the one the system provides
(Debian's ``chromium``, found by :func:`find_chromium`) and Playwright is launched with its
executable path. Playwright is an optional dependency (``pip install 'benchgate[browser]'``);
without it, or without Chromium, every function raises :class:`BrowserError` with one line
saying what to install (:func:`unavailable` says so before any work is done).

- :func:`check_page` loads an HTML file and returns a :class:`PageFindings`: console errors and
  uncaught exceptions, every request other than the file itself and ``data:`` URIs (and those
  requests are refused and the page is kept offline, so a loaded page never reaches the network),
  the size of each ``<svg>``, and the page text.
- :func:`overflow` lists what does not fit a viewport of a given width.
- :func:`screenshot` writes a PNG, :func:`print_pdf` a PDF (A4 or Letter, print styles).
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from urllib.parse import unquote

from benchgate.errors import BrowserError

CANDIDATES = ("chromium", "chromium-browser", "google-chrome")
#: command-line switches for the system browser: headless, no sandbox (containers, CI as
#: root), and nothing that phones home (updates, sync, first-run pages, background fetches).
ARGS = ("--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
        "--disable-component-update", "--disable-sync")
PAPER = {"a4": "A4", "letter": "Letter"}  # ISO 216 A4 (210 mm × 297 mm); ANSI Letter (8.5 in × 11 in)
NO_BROWSER = "no Chromium found; install Debian's chromium package"
NO_PLAYWRIGHT = ("Playwright for Python is not installed; install it with "
                 "pip install 'benchgate[browser]' (it drives the system's Chromium)")
#: requests a page may make while being loaded: its own file, and inline data.
_NETWORK = re.compile(r"^(?!file:|data:|about:|blob:)[a-z][a-z0-9+.-]*:", re.I)



def find_chromium() -> str | None:
    """Path of a Chromium-family browser on PATH (or /usr/bin/chromium), or None."""
    for name in CANDIDATES:
        found = shutil.which(name)
        if found:
            return found
    return "/usr/bin/chromium" if os.access("/usr/bin/chromium", os.X_OK) else None


def unavailable() -> str | None:
    """Why the browser functions cannot work here (one line), or None when they can."""
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return NO_PLAYWRIGHT
    return NO_BROWSER if find_chromium() is None else None


@dataclass
class PageFindings:
    """What loading one page did."""

    url: str
    console_errors: list[str] = field(default_factory=list)
    requests: list[str] = field(default_factory=list)  # anything but the file itself and data: URIs
    svg_sizes: list[tuple[str, float, float]] = field(default_factory=list)  # (label, width, height) CSS px
    text: str = ""


@contextlib.contextmanager
def session(timeout: float = 30.0, chromium: str | None = None) -> Iterator[Any]:
    """The system Chromium under Playwright, closed on the way out; yields a Playwright ``Browser``."""
    why = None if chromium else unavailable()
    if why:
        raise BrowserError(why)
    from playwright.sync_api import Error as PlaywrightError
    from playwright.sync_api import sync_playwright

    exe = chromium or find_chromium()
    with sync_playwright() as pw:
        try:
            browser = pw.chromium.launch(executable_path=exe, args=list(ARGS), headless=True,
                                         timeout=timeout * 1000)
        except PlaywrightError as exc:
            raise BrowserError(f"Chromium ({exe}) did not start: {_first_line(exc)}") from None
        try:
            yield browser
        finally:
            with contextlib.suppress(PlaywrightError):
                browser.close()


def _first_line(exc: BaseException) -> str:
    lines = [ln.strip() for ln in str(exc).splitlines() if ln.strip() and not ln.strip().startswith("=")]
    return lines[0] if lines else type(exc).__name__


def _file_url(html_path: str | Path) -> str:
    path = Path(html_path).resolve()
    if not path.is_file():
        raise BrowserError(f"{path}: no such file")
    return path.as_uri()


@contextlib.contextmanager
def _page(url: str, *, width: int = 1000, media: str = "screen", timeout: float = 30.0,
          browser: Any = None) -> Iterator[tuple[Any, PageFindings]]:
    """Open ``url`` in a fresh page; yields the page and what it did while loading."""
    from playwright.sync_api import Error as PlaywrightError

    with contextlib.ExitStack() as stack:
        if browser is None:
            browser = stack.enter_context(session(timeout))
        context = browser.new_context(viewport={"width": width, "height": 800}, device_scale_factor=1,
                                      java_script_enabled=True, offline=True)
        stack.callback(context.close)
        found = PageFindings(url=url)
        own = unquote(url.split("#")[0])

        def on_request(request: Any) -> None:
            u = request.url
            if unquote(u.split("#")[0]) != own and not u.startswith("data:"):
                found.requests.append(u)

        def on_console(msg: Any) -> None:
            if msg.type in ("error", "assert"):
                found.console_errors.append(f"console.{msg.type}: {msg.text}")

        context.on("request", on_request)
        context.on("requestfailed", lambda r: found.console_errors.append(
            f"request failed: {r.url} ({r.failure})") if _NETWORK.match(r.url) is None else None)
        context.route(_NETWORK, lambda route: route.abort())  # a loaded page never reaches the network
        page = context.new_page()
        page.set_default_timeout(timeout * 1000)
        page.on("console", on_console)
        page.on("pageerror", lambda exc: found.console_errors.append(f"exception: {exc}"))
        page.emulate_media(media=media)
        try:
            page.goto(url, wait_until="load")
            page.wait_for_load_state("networkidle")  # late requests after the load event
        except PlaywrightError as exc:
            raise BrowserError(f"{url}: the page did not load: {_first_line(exc)}") from None
        yield page, found


_SVG_SIZES = """() => Array.from(document.querySelectorAll('svg')).map(function (s) {
  var r = s.getBoundingClientRect();
  return [s.getAttribute('aria-label') || s.id || '', r.width, r.height]; })"""


def check_page(html_path: str | Path, *, timeout: float = 30.0, browser: Any = None) -> PageFindings:
    """Load ``html_path`` in headless Chromium and report what happened.

    Parameters
    ----------
    html_path : path
        The page to load (a file).
    timeout : float
        Seconds for Chromium to start and the page to load.
    browser : playwright Browser, optional
        One from :func:`session`, to check several pages with one browser.

    Returns
    -------
    PageFindings
        Console errors (``console.error``/``console.assert`` calls, uncaught exceptions, error
        messages the browser logged, failed loads), every request other than the page's own
        file and ``data:`` URIs, the rendered size of each ``<svg>`` and the page's visible text.
    """
    url = _file_url(html_path)
    with _page(url, timeout=timeout, browser=browser) as (page, found):
        found.svg_sizes = [(str(a), float(w), float(h)) for a, w, h in page.evaluate(_SVG_SIZES)]
        found.text = page.inner_text("body") if page.query_selector("body") else ""
    return found


_OVERFLOW = """() => {
  var out = [], vw = document.documentElement.clientWidth;
  if (document.documentElement.scrollWidth > vw) out.push('page: ' + document.documentElement.scrollWidth + ' px wide');
  Array.from(document.querySelectorAll('body *')).forEach(function (e) {
    var r = e.getBoundingClientRect(), cs = getComputedStyle(e);
    if (r.width === 0 || cs.display === 'none' || cs.visibility === 'hidden') return;
    var what = e.tagName.toLowerCase() + (typeof e.className === 'string' && e.className ? '.' + e.className : '');
    if (r.right > vw + 0.5) out.push(what + ' ends at ' + Math.round(r.right) + ' px');
    if (e.scrollWidth > e.clientWidth + 1 && cs.overflowX === 'visible' && e.clientWidth > 0
        && !(e instanceof SVGElement))
      out.push(what + ' content ' + e.scrollWidth + ' px in ' + e.clientWidth + ' px: ' + (e.innerText || '').slice(0, 40));
  });
  return out; }"""


def overflow(html_path: str | Path, *, width: int = 700, timeout: float = 30.0, browser: Any = None) -> list[str]:
    """Elements of ``html_path`` that do not fit a ``width``-pixel-wide viewport.

    Anything ending right of the viewport, and any box whose content is wider than the box
    (text running into the next table cell); an empty list when the page fits.
    """
    url = _file_url(html_path)
    with _page(url, width=width, timeout=timeout, browser=browser) as (page, _):
        return [str(x) for x in page.evaluate(_OVERFLOW)]


def screenshot(html_path: str | Path, png_path: str | Path, *, width: int = 1000, media: str = "screen",
               timeout: float = 30.0, browser: Any = None) -> Path:
    """Write a full-page PNG of ``html_path`` (``media="print"`` shows the print styles)."""
    url = _file_url(html_path)
    out = Path(png_path)
    out.parent.mkdir(parents=True, exist_ok=True)
    with _page(url, width=width, media=media, timeout=timeout, browser=browser) as (page, _):
        page.screenshot(path=str(out), full_page=True, type="png")
    return out


def print_pdf(html_path: str | Path, pdf_path: str | Path, *, paper: str = "a4", timeout: float = 60.0,
              browser: Any = None) -> Path:
    """Print ``html_path`` to a PDF on A4 or Letter paper (page margins from the report's @page)."""
    if paper not in PAPER:
        raise BrowserError(f"unknown paper {paper!r}; expected one of {', '.join(PAPER)}")
    url = _file_url(html_path)
    out = Path(pdf_path)
    out.parent.mkdir(parents=True, exist_ok=True)
    with _page(url, media="print", timeout=timeout, browser=browser) as (page, _):
        page.pdf(path=str(out), format=PAPER[paper], print_background=True, prefer_css_page_size=False)
    return out
