"""The starting site lists: the migrations seed from a frozen module, the app uses the
newest frozen version."""

from __future__ import annotations

import hashlib

from shopfloor.floor import site_lists, site_lists_v1

# The content of site_lists_v1.py when the migrations first seeded from it. A migration
# must seed the same rows whenever it runs, so this never changes: a new list is a new
# module (site_lists_v2.py) with its own data migration.
FROZEN_V1 = "fdba981e6ee9da321e8d110c83f45eab2b49703b211955a84524dc71c9ddbb51"


def test_the_lists_the_migrations_seed_are_frozen():
    lists = (site_lists_v1.SHELF_LIVES, site_lists_v1.SCRAP_REASONS, site_lists_v1.ROOT_CAUSES)
    digest = hashlib.sha256(repr(lists).encode()).hexdigest()
    assert digest == FROZEN_V1, (
        "shopfloor/floor/site_lists_v1.py changed, but migrations floor 0004 and quality "
        "0004 seed from it: restore it, and put a changed list in site_lists_v2.py with a "
        "data migration (see that module's docstring)"
    )


def test_the_app_uses_the_newest_frozen_lists():
    assert site_lists.SHELF_LIVES is site_lists_v1.SHELF_LIVES
    assert site_lists.SCRAP_REASONS is site_lists_v1.SCRAP_REASONS
    assert site_lists.ROOT_CAUSES is site_lists_v1.ROOT_CAUSES
