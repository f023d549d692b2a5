"""Domain errors raised by services; views and the API turn them into clear replies."""

from __future__ import annotations

from typing import Any


class DomainError(Exception):
    """A refusal a person or instrument can act on. `status` is the HTTP status to use."""

    status = 400
    code = "invalid"

    def __init__(self, detail: str, *, problems: list[dict[str, Any]] | None = None) -> None:
        super().__init__(detail)
        self.detail = detail
        self.problems = problems or []

    def as_dict(self) -> dict[str, Any]:
        body: dict[str, Any] = {"error": self.code, "detail": self.detail}
        if self.problems:
            body["problems"] = self.problems
        return body


class InvalidInput(DomainError):
    status = 400
    code = "invalid"


class NotAllowed(DomainError):
    status = 403
    code = "not_allowed"


class NotFound(DomainError):
    status = 404
    code = "not_found"


class Conflict(DomainError):
    status = 409
    code = "conflict"


class IdempotencyMismatch(DomainError):
    status = 422
    code = "idempotency_key_reused"
