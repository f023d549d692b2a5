"""The error every SPC function raises for input that cannot be charted.

Pure: no Django imports.
"""

from __future__ import annotations


class SpcInputError(ValueError):
    """Input that cannot be charted; the message says what was wrong and what is allowed.

    It subclasses ``ValueError`` so generic callers still treat it as bad input; the
    management command maps it to exit code 2.
    """
