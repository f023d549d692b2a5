"""The one read-scope rule (issue 14, finding 6): shopfloor.access.

The role matrix (tests/test_role_matrix.py) asserts it for every page and endpoint; these
tests pin the rule's parts: one "is admin" rule, a badge-less administrator reads but
cannot sign, and a refusal never renders the lot it refuses.
"""

from __future__ import annotations

import pytest
from django.contrib.auth.models import AnonymousUser, User
from django.test import Client

from shopfloor import access
from shopfloor.plant.models import Role, WorkCenter
from tests.factories import make_person

pytestmark = pytest.mark.django_db


def test_one_admin_rule_superuser_or_admin_group(floor):
    root = User.objects.create_superuser("root-x", "r@example.invalid", "pw-root-long")
    in_group = make_person(Role.ADMIN, "7001", "Ada Group")
    operator = floor.personas["operator"]
    assert access.is_admin(root)
    assert access.is_admin(in_group.user)
    assert not access.is_admin(operator.user)
    assert not access.is_admin(AnonymousUser())
    # The services' role checks (Person.roles) use the same rule.
    badge_root = make_person(None, "7002", "Rory Root")
    User.objects.filter(pk=badge_root.user_id).update(is_superuser=True)
    badge_root.user.refresh_from_db()
    assert "admin" in badge_root.roles()
    assert access.scope_for(badge_root.user).sees_all


def test_badgeless_superuser_reads_the_board_but_cannot_sign(floor):
    root = User.objects.create_superuser("root-y", "r@example.invalid", "pw-root-long")
    client = Client()
    client.force_login(root)
    assert client.get("/board/").status_code == 200
    assert client.get(f"/quality/lots/{floor.lot.code}/").status_code == 200
    step = floor.lot.steps.order_by("position").first()
    reply = client.post(
        f"/board/queue/{step.work_center_id}/move/", {"lot_step": step.pk, "move": "up"}
    )
    assert reply.status_code == 403
    assert "no badge on file" in reply.content.decode()


def test_a_refused_step_action_does_not_render_the_lot(floor):
    far_center = WorkCenter.objects.create(code="WC-FAR2", name="Far bench")
    far = make_person(Role.OPERATOR, "7003", "Fen Far", work_centers=[far_center])
    client = Client()
    client.force_login(far.user)
    step = floor.lot.steps.order_by("position").first()
    reply = client.post(f"/floor/steps/{step.pk}/pause/", {"reason": "x"})
    assert reply.status_code == 403
    html = reply.content.decode()
    # The lot page would list the route; the refusal shows the reason only.
    later = floor.lot.steps.order_by("-position").first()
    assert later.name not in html
    assert client.get(f"/floor/lots/{floor.lot.code}/").status_code == 403
    assert client.get(f"/api/v1/lots/{floor.lot.code}/").status_code == 403
