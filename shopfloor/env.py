"""Typed helpers that read settings from the environment.

Every setting the service reads comes through one of these, so a wrong value fails
loudly at start-up with the variable's name instead of surfacing as a strange error
on the shop floor later.
"""

from __future__ import annotations

import os
from pathlib import Path
from urllib.parse import parse_qs, unquote, urlsplit

from django.core.exceptions import ImproperlyConfigured

_TRUE = {"1", "true", "yes", "on"}
_FALSE = {"0", "false", "no", "off", ""}


def env_str(name: str, default: str | None = None) -> str | None:
    """A string from NAME, or from the file named by NAME_FILE (container secrets)."""
    file_var = os.environ.get(f"{name}_FILE")
    if file_var:
        try:
            return Path(file_var).read_text(encoding="utf-8").strip()
        except OSError as exc:
            raise ImproperlyConfigured(f"{name}_FILE={file_var!r} cannot be read: {exc}") from exc
    return os.environ.get(name, default)


def env_bool(name: str, default: bool) -> bool:
    raw = os.environ.get(name)
    if raw is None:
        return default
    value = raw.strip().lower()
    if value in _TRUE:
        return True
    if value in _FALSE:
        return False
    raise ImproperlyConfigured(
        f"{name}={raw!r} is not a yes/no value; use one of 1, 0, true, false"
    )


def env_int(name: str, default: int, *, minimum: int | None = None) -> int:
    raw = os.environ.get(name)
    if raw is None or raw.strip() == "":
        return default
    try:
        value = int(raw)
    except ValueError as exc:
        raise ImproperlyConfigured(f"{name}={raw!r} is not a whole number") from exc
    if minimum is not None and value < minimum:
        raise ImproperlyConfigured(f"{name}={value} is below the allowed minimum {minimum}")
    return value


def env_list(name: str, default: list[str]) -> list[str]:
    raw = os.environ.get(name)
    if raw is None:
        return default
    return [item.strip() for item in raw.split(",") if item.strip()]


def database_from_url(url: str, *, conn_max_age: int = 60) -> dict[str, object]:
    """Turn DATABASE_URL into Django's DATABASES entry (postgres:// or sqlite:///path)."""
    parts = urlsplit(url)
    scheme = parts.scheme.lower()
    if scheme in {"postgres", "postgresql", "pgsql"}:
        options = {k: v[-1] for k, v in parse_qs(parts.query).items()}
        return {
            "ENGINE": "django.db.backends.postgresql",
            "NAME": unquote(parts.path.lstrip("/")) or "shopfloor",
            "USER": unquote(parts.username or ""),
            "PASSWORD": unquote(parts.password or ""),
            "HOST": parts.hostname or "",
            "PORT": str(parts.port or ""),
            "CONN_MAX_AGE": conn_max_age,
            "CONN_HEALTH_CHECKS": True,
            "OPTIONS": options,
        }
    if scheme == "sqlite":
        path = unquote(parts.path)
        if parts.netloc:  # sqlite://relative/path
            path = parts.netloc + path
        return {"ENGINE": "django.db.backends.sqlite3", "NAME": path or ":memory:"}
    raise ImproperlyConfigured(
        f"DATABASE_URL scheme {scheme!r} is not supported; use postgres://user@host:5432/name "
        "or sqlite:///absolute/path.sqlite3"
    )
