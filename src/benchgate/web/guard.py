"""Who may use the page, and which requests may change anything.

- Loopback (127.0.0.1, ::1, localhost) needs no token, but the ``Host`` header must name the
  loopback address and port (a hostile web site rebinding its own name to 127.0.0.1 is refused).
- Any other listening address needs the station token: the page asks for it once and keeps a
  cookie derived from it (HttpOnly, SameSite=Strict). Without it every request is refused.
- Every state-changing request must be a POST from the page itself: its ``Origin`` must be this
  server, the browser must not call it cross-site (``Sec-Fetch-Site``), and the API calls carry
  the page's anti-forgery token in a header (which a cross-site form cannot set).
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
from dataclasses import dataclass, field

LOOPBACK = frozenset({"127.0.0.1", "::1", "localhost"})
STATION_COOKIE = "benchgate_station"
CLIENT_COOKIE = "benchgate_client"
CSRF_HEADER = "x-benchgate-csrf"
SAFE_METHODS = frozenset({"GET", "HEAD"})


def needs_token(host: str) -> bool:
    """Any listening address other than loopback needs the station token."""
    return host.strip("[]") not in LOOPBACK


@dataclass
class Guard:
    """The page's access rules for one listening address."""

    host: str
    port: int
    token: str | None = None
    secret: bytes = field(default_factory=lambda: secrets.token_bytes(32))

    def __post_init__(self) -> None:
        if needs_token(self.host) and not self.token:
            raise ValueError(f"listening on {self.host} needs a station token")
        self.csrf = secrets.token_urlsafe(24)

    @property
    def token_required(self) -> bool:
        return self.token is not None

    # ------------------------------------------------------------------ hosts and origins
    def allowed_hosts(self) -> set[str]:
        names = {self.host, "127.0.0.1", "localhost", "[::1]"} if not needs_token(self.host) else {self.host}
        names = {f"[{n}]" if ":" in n and not n.startswith("[") else n for n in names}
        return {f"{n}:{self.port}" for n in names}

    def host_ok(self, host_header: str | None) -> bool:
        if self.token_required:
            return True  # the token, not the name, protects a non-loopback listener
        return (host_header or "").lower() in self.allowed_hosts()

    def origin_ok(self, origin: str | None, host_header: str | None, fetch_site: str | None) -> bool:
        if fetch_site is not None and fetch_site not in ("same-origin", "none"):
            return False
        if not origin or not host_header:
            return False
        return hmac.compare_digest(origin.lower(), f"http://{host_header.lower()}")

    # ------------------------------------------------------------------ the station token
    def station_cookie(self) -> str:
        return hmac.new(self.secret, b"station:" + (self.token or "").encode(), hashlib.sha256).hexdigest()

    def token_ok(self, typed: str) -> bool:
        return self.token is not None and hmac.compare_digest(typed.strip().encode(), self.token.encode())

    def authorised(self, cookie: str | None) -> bool:
        if not self.token_required:
            return True
        return cookie is not None and hmac.compare_digest(cookie, self.station_cookie())

    def csrf_ok(self, header: str | None) -> bool:
        return header is not None and hmac.compare_digest(header, self.csrf)

    # ------------------------------------------------------------------ pages
    def client_tag(self, client_cookie: str) -> str:
        """A page's public tag (shown to every page) from its private cookie."""
        return hmac.new(self.secret, b"client:" + client_cookie.encode(), hashlib.sha256).hexdigest()[:16]
