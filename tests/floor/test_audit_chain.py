"""The audit trail is hash-chained (sha256 over the previous hash and the entry's
canonical JSON; SHA-256 as specified in FIPS 180-4) and signatures are bound to their
record: edits and deletions made behind the application's back are found.
"""

from __future__ import annotations

import hashlib

import pytest
from django.core.management import call_command
from django.db import connection

from shopfloor.audit import services as audit
from shopfloor.audit.models import AuditEntry
from shopfloor.floor import services
from tests.factories import PIN

pytestmark = pytest.mark.django_db


@pytest.fixture(autouse=True)
def sealed(floor):
    """The sealing task would have chained the floor's entries by now; do it here."""
    audit.seal()


def verify(capsys) -> tuple[int, str]:
    try:
        call_command("audit", "verify")
    except SystemExit as exc:
        captured = capsys.readouterr()
        return int(exc.code), captured.err + captured.out
    captured = capsys.readouterr()
    return 0, captured.out + captured.err


def test_intact_chain_is_ok(floor, capsys):
    code, out = verify(capsys)
    assert code == 0 and "intact" in out
    first = AuditEntry.objects.order_by("seq").first()
    # Recompute the first link independently: sha256(64 zeros + canonical JSON), SHA-256 as
    # specified in FIPS 180-4 through Python's hashlib.
    expected = hashlib.sha256(
        ("0" * 64 + audit.canonical_json(audit.entry_content(first))).encode()
    ).hexdigest()
    assert first.prev_hash == "0" * 64 and first.hash == expected


def test_sql_edit_breaks_chain_at_that_entry(floor, capsys):
    victim = AuditEntry.objects.order_by("seq")[2]
    with connection.cursor() as cursor:
        cursor.execute(
            "UPDATE audit_auditentry SET actor_name = %s WHERE id = %s", ["someone else", victim.pk]
        )
    code, out = verify(capsys)
    assert code == 1
    assert f"BROKEN at entry #{victim.seq}" in out


def test_sql_delete_breaks_chain(floor, capsys):
    victim = AuditEntry.objects.order_by("seq")[1]
    with connection.cursor() as cursor:
        cursor.execute("DELETE FROM audit_auditentry WHERE id = %s", [victim.pk])
    code, out = verify(capsys)
    assert code == 1
    assert f"BROKEN at entry #{victim.seq}" in out


def test_sql_delete_of_last_entry_is_found(floor, capsys):
    last = AuditEntry.objects.order_by("-seq").first()
    with connection.cursor() as cursor:
        cursor.execute("DELETE FROM audit_auditentry WHERE id = %s", [last.pk])
    code, out = verify(capsys)
    assert code == 1 and f"#{last.seq}" in out


def test_signature_cannot_move_to_another_record(floor, operator):
    first, second = list(floor.lot.steps.order_by("position"))[:2]
    services.start_step(person=operator, lot_step_id=first.pk)
    done = services.complete_step(person=operator, lot_step_id=first.pk, pin=PIN)
    sig = done.signature
    content = services.step_content(done)
    assert audit.signature_valid(sig, record_type="lot_step", record_id=done.pk, content=content)
    sig.record_id = str(second.pk)
    assert not audit.signature_valid(
        sig, record_type="lot_step", record_id=second.pk, content=services.step_content(second)
    )
    assert not audit.signature_valid(
        sig, record_type="lot_step", record_id=second.pk, content=content
    )
