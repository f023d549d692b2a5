"""Fast password/PIN hashing in these tests (PBKDF2's cost is for production, not tests)."""

import pytest


@pytest.fixture(autouse=True)
def _fast_hashing(settings):
    settings.PASSWORD_HASHERS = [
        "django.contrib.auth.hashers.MD5PasswordHasher",
        "shopfloor.plant.hashers.PinHasher",
    ]
