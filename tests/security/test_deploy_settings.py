"""Production settings: `check --deploy` is clean, and a wrong setting stops start-up with
a message naming the variable (twelve-factor config, https://12factor.net/config; Django's
deployment checklist, https://docs.djangoproject.com/en/stable/howto/deployment/checklist/).
"""

from __future__ import annotations

import os
import secrets
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
_OURS = {
    "DEBUG",
    "DJANGO_ALLOW_ASYNC_UNSAFE",  # test-only (live server); never set in production
    "SECRET_KEY",
    "SECRET_KEY_FILE",
    "ALLOWED_HOSTS",
    "CSRF_TRUSTED_ORIGINS",
    "DATABASE_URL",
    "REDIS_URL",
    "CI",
}


def production_env(**over: str | None) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k not in _OURS}
    env.update(
        DJANGO_SETTINGS_MODULE="shopfloor.settings",
        DEBUG="0",
        SECRET_KEY=secrets.token_urlsafe(50),
        ALLOWED_HOSTS="traveller.shop.example.test",
        CSRF_TRUSTED_ORIGINS="https://traveller.shop.example.test",
        DATABASE_URL="postgres://shopfloor@db.example.test:5432/shopfloor",
        REDIS_URL="redis://redis.example.test:6379/0",
    )
    for key, value in over.items():
        if value is None:
            env.pop(key, None)
        else:
            env[key] = value
    return env


def check_deploy(env: dict[str, str]) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "manage.py", "check", "--deploy", "--fail-level", "WARNING"],
        cwd=REPO,
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
    )


def test_production_settings_pass_the_deploy_check():
    done = check_deploy(production_env())
    assert done.returncode == 0, done.stdout + done.stderr
    assert "no issues" in done.stdout.lower()


@pytest.mark.parametrize(
    ("change", "named"),
    [
        ({"SECRET_KEY": None}, "SECRET_KEY"),
        ({"SECRET_KEY": ""}, "SECRET_KEY"),
        ({"ALLOWED_HOSTS": None}, "ALLOWED_HOSTS"),
        ({"ALLOWED_HOSTS": " , "}, "ALLOWED_HOSTS"),
        ({"DATABASE_URL": "mysql://shopfloor@db.example.test/shopfloor"}, "DATABASE_URL"),
        ({"DEBUG": "maybe"}, "DEBUG"),
    ],
    ids=["no-secret", "empty-secret", "no-hosts", "blank-hosts", "db-scheme", "debug-word"],
)
def test_a_wrong_production_setting_stops_with_its_name(change, named):
    done = check_deploy(production_env(**change))
    assert done.returncode != 0
    assert "ImproperlyConfigured" in done.stderr
    # The message names the variable in the exception line itself, not only in a path.
    last = done.stderr.strip().splitlines()[-1]
    assert named in last, done.stderr[-1500:]


def test_a_short_secret_key_fails_the_deploy_check():
    """Django's security.W009: a SECRET_KEY shorter than 50 characters is weak."""
    done = check_deploy(production_env(SECRET_KEY="short-but-set"))
    assert done.returncode != 0
    assert "W009" in done.stdout + done.stderr
