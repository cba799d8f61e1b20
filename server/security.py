"""Who may drive the simulation: loopback by default, same-origin pages only, a token off loopback, and caps.

A stray web page in another tab must never steer the server. Browsers send an Origin header with
every websocket handshake; a connection whose Origin is present and is not this server's own page
is refused. On loopback the origin must also name a loopback host, which defeats DNS rebinding
(where a foreign name is made to resolve to 127.0.0.1 and Origin then equals Host). Off loopback a
random token, printed in the start-up URL, is required on the websocket and on downloads.
"""
from __future__ import annotations

import ipaddress
import secrets
import time
from dataclasses import dataclass
from urllib.parse import urlsplit

from .protocol import MAX_MESSAGE_BYTES, MAX_MESSAGES_PER_S

LOOPBACK_NAMES = ("localhost",)
DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 8765


def is_loopback(host: str) -> bool:
    """127.0.0.0/8, ::1 and 'localhost' (with or without IPv6 brackets)."""
    name = host.strip().strip("[]").lower()
    if name in LOOPBACK_NAMES or name.endswith(".localhost"):
        return True
    try:
        return ipaddress.ip_address(name).is_loopback
    except ValueError:
        return False


def new_token() -> str:
    return secrets.token_urlsafe(24)


@dataclass(frozen=True)
class Access:
    """The access rules of one running server."""

    host: str = DEFAULT_HOST
    port: int = DEFAULT_PORT
    token: str | None = None
    max_message_bytes: int = MAX_MESSAGE_BYTES
    max_messages_per_s: float = MAX_MESSAGES_PER_S

    @classmethod
    def for_bind(cls, host: str, port: int) -> "Access":
        """Loopback: no token. Any other address: a fresh random token."""
        return cls(host=host, port=port, token=None if is_loopback(host) else new_token())

    @property
    def on_loopback(self) -> bool:
        return is_loopback(self.host)

    def url(self, path: str = "/") -> str:
        """The address to open, token included when one is needed."""
        host = self.host
        if host in ("0.0.0.0", "::", ""):
            host = "<this machine's address>"
        elif ":" in host and not host.startswith("["):
            host = f"[{host}]"
        query = f"?token={self.token}" if self.token else ""
        return f"http://{host}:{self.port}{path}{query}"

    def token_ok(self, given: str | None) -> bool:
        if self.token is None:
            return True
        return given is not None and secrets.compare_digest(given.encode(), self.token.encode())

    def origin_ok(self, origin: str | None, host_header: str | None) -> bool:
        """No Origin (not a browser) is fine; a browser's Origin must be this server's own page."""
        if origin is None:
            return True
        parts = urlsplit(origin)
        if parts.scheme not in ("http", "https") or not parts.netloc or not host_header:
            return False
        if parts.netloc.lower() != host_header.strip().lower():
            return False
        if self.on_loopback and not is_loopback(parts.hostname or ""):
            return False
        return True

    def host_ok(self, host_header: str | None) -> bool:
        """On loopback the Host header must name a loopback host (DNS-rebinding guard); elsewhere any."""
        if not self.on_loopback or host_header is None:
            return True
        return is_loopback(urlsplit("//" + host_header.strip()).hostname or "")


class RateLimiter:
    """Token bucket: `rate` messages per second on average, bursts of up to `rate` at once."""

    def __init__(self, rate: float, clock=time.monotonic):
        self.rate = float(rate)
        self.capacity = float(rate)
        self.tokens = float(rate)
        self.clock = clock
        self.last = clock()

    def allow(self) -> bool:
        now = self.clock()
        self.tokens = min(self.capacity, self.tokens + (now - self.last) * self.rate)
        self.last = now
        if self.tokens >= 1.0:
            self.tokens -= 1.0
            return True
        return False
