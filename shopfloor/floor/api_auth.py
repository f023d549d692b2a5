"""Token authentication for instruments (gauges, test equipment) posting readings.

A token is shown once when issued; only its SHA-256 is stored. Each token belongs to
one work center and may only post readings there (see api permissions).
"""

from __future__ import annotations

import hashlib
from typing import Any

from rest_framework import authentication, exceptions
from rest_framework.request import Request

from shopfloor.floor.models import InstrumentToken


def hash_token(raw: str) -> str:
    return hashlib.sha256(raw.encode()).hexdigest()


class InstrumentTokenAuthentication(authentication.BaseAuthentication):
    keyword = "Token"

    def authenticate(self, request: Request) -> tuple[Any, Any] | None:
        header = authentication.get_authorization_header(request).decode(errors="replace")
        if not header:
            return None
        parts = header.split()
        # A credential we do not understand is refused, never ignored in favour of the
        # session cookie beside it: the caller meant to authenticate with it.
        if not parts or parts[0] != self.keyword or len(parts) != 2:
            raise exceptions.AuthenticationFailed("Authorization header must be 'Token <key>'")

        token = (
            InstrumentToken.objects.select_related("user__person", "work_center")
            .filter(key_hash=hash_token(parts[1]), active=True)
            .first()
        )
        if token is None or not token.user.is_active:
            raise exceptions.AuthenticationFailed("Unknown or withdrawn instrument token")
        return (token.user, token)

    def authenticate_header(self, request: Request) -> str:
        return self.keyword
