"""The PIN hasher.

A 4-8 digit PIN has too few values for hashing cost to protect it offline; what protects
it is the lockout after PIN_MAX_FAILURES wrong tries and the login in front of it. A
lighter PBKDF2 keeps a sign-off on the tablet quick while the PIN is still never stored
in clear.
"""

from django.contrib.auth.hashers import PBKDF2PasswordHasher


class PinHasher(PBKDF2PasswordHasher):
    algorithm = "pin_pbkdf2_sha256"
    iterations = 20_000
