"""The one error type the server answers a client with: field, value, rule, what is allowed, a plain sentence."""
from __future__ import annotations

from typing import Any

from shockslate.solver.validation import Problem, show_value


class RequestError(ValueError):
    """A request that was refused; nothing changed. Becomes an `error` message (see PROTOCOL.md).

    field: path in the message (reservoir.p0_pa); value: what was given; allowed: what is allowed, in a
    few words; rule: a short code of the rule broken (above, one_of, required, state ...); message: one
    plain sentence for the user.
    """

    def __init__(self, field: str, value: Any, allowed: str, message: str | None = None, rule: str = "not_allowed"):
        self.field = field
        self.value = value
        self.allowed = allowed
        self.rule = rule
        super().__init__(message or f"{field} {show_value(value)} is not allowed; allowed: {allowed}.")

    @classmethod
    def from_problem(cls, problem: Problem, field: str | None = None) -> "RequestError":
        return cls(problem.field if field is None else field, problem.value, problem.allowed, problem.message,
                   problem.rule)

    @property
    def message(self) -> str:
        return str(self)
