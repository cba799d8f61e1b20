"""The one error type the server answers a client with: which field, what value, what is allowed."""
from __future__ import annotations

from typing import Any


class RequestError(ValueError):
    """A request that was refused; nothing changed. Becomes an `error` message (see PROTOCOL.md)."""

    def __init__(self, field: str, value: Any, allowed: str, message: str | None = None):
        self.field = field
        self.value = value
        self.allowed = allowed
        super().__init__(message or f"{field} = {value!r} is not allowed: {allowed}")

    @property
    def message(self) -> str:
        return str(self)
