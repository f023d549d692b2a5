"""The sealed audit trail: byte-exact canonical content, sealing without a shared writer
lock, RFC 6962 checkpoints, and a verifier that reports every break in bounded memory.

Outside references: SHA-256 as specified in FIPS 180-4 (Python's hashlib); the Merkle
tree hash of RFC 6962 section 2.1; JSON number and string syntax of RFC 8259.
"""

from __future__ import annotations

import hashlib
import importlib
import threading
import tracemalloc
from datetime import timedelta

import pytest
from django.core.management import call_command
from django.db import connection, transaction
from django.db.models import Max
from django.utils import timezone
from rest_framework.test import APIClient

from shopfloor.audit import services as audit
from shopfloor.audit.models import AuditCheckpoint, AuditEntry
from tests.helpers import advance_to

pytestmark = pytest.mark.django_db

# Every JSON type (RFC 8259 section 3), with the values jsonb does not keep byte for byte:
# -0.0 (numeric has no negative zero), 1e-07 (printed as 0.0000001), 1.10 (a float that
# is 1.1) next to the string "1.10", non-ASCII text and a number beyond 64 bits.
AWKWARD = {
    "minus_zero": -0.0,
    "tiny": 1e-7,
    "one_ten": 1.10,
    "one_ten_text": "1.10",
    "text": 'Kupfer µm Ø 銅 ✓ "quoted" back\\slash',
    "big": 2**70,
    "negative": -42,
    "yes": True,
    "no": False,
    "nothing": None,
    "list": [0, -0.0, 1.5e300, [], {}],
    "empty": "",
    "nested": {"b": 1, "a": [{"z": None}]},
}


def _entries(n: int, *, action: str = "test.entry") -> list[AuditEntry]:
    return [
        audit.record(actor=None, action=action, object_type="test", object_id=i, after={"i": i})
        for i in range(n)
    ]


def _verify_command(capsys, *args: str) -> tuple[int, str]:
    try:
        call_command("audit", "verify", *args)
    except SystemExit as exc:
        captured = capsys.readouterr()
        return int(exc.code), captured.err + captured.out
    captured = capsys.readouterr()
    return 0, captured.out + captured.err


def test_awkward_values_survive_the_database_round_trip():
    entry = audit.record(
        actor=None, action="test.awkward", object_type="test", object_id="x", after=AWKWARD
    )
    audit.seal()
    stored = AuditEntry.objects.get(pk=entry.pk)
    # The hashed bytes are the ones written: RFC 8259 number text as Python's shortest
    # round-trip repr, non-ASCII as \u escapes, keys sorted.
    assert '"minus_zero":-0.0' in stored.body
    assert '"tiny":1e-07' in stored.body
    assert '"one_ten":1.1,"one_ten_text":"1.10"' in stored.body
    assert '"big":1180591620717411303424' in stored.body  # 2**70
    assert "\\u00b5m" in stored.body and "\\u9285" in stored.body
    assert stored.body.isascii()
    # The hash is SHA-256 (FIPS 180-4) of the previous hash and the sealed text,
    # recomputed here independently of the service.
    sealed = stored.body[:-1] + f',"seq":{stored.seq}}}'
    assert stored.hash == hashlib.sha256((stored.prev_hash + sealed).encode()).hexdigest()
    # jsonb kept the value, not the bytes: -0.0 comes back as 0 and still verifies.
    assert stored.after["minus_zero"] == 0
    report = audit.verify_chain()
    assert report.ok, report.problems


def test_reading_of_minus_zero_keeps_the_trail_intact(floor, capsys):
    operator = floor.personas["operator"]
    advance_to(floor.lot, "pattern_plate_copper", by=operator, start=True)
    client = APIClient()
    client.force_login(operator.user)
    reply = client.post(
        "/api/v1/readings/",
        {
            "lot": floor.lot.code,
            "quantity": "surface_copper",
            "value": "-0",
            "unit": "um",
            "sample_index": 1,
            # -0 is far below the window: the typo guard wants it confirmed first
            "confirm_out_of_window": True,
        },
        format="json",
    )
    assert reply.status_code == 201, reply.content
    audit.seal()
    code, out = _verify_command(capsys)
    assert code == 0 and "intact" in out, out
    recorded = AuditEntry.objects.get(action="reading.recorded")
    assert '"value":-0.0' in recorded.body


def test_record_is_one_insert_and_never_touches_the_head():
    from django.test.utils import CaptureQueriesContext

    with CaptureQueriesContext(connection) as queries:
        audit.record(actor=None, action="test.one", object_type="test", object_id=1)
    sql = [q["sql"] for q in queries.captured_queries]
    assert len(sql) == 1 and sql[0].startswith("INSERT INTO audit_auditentry"), sql
    assert not any("audithead" in s for s in sql)


def test_verifier_reports_every_break_with_a_summary(capsys):
    _entries(12)
    audit.seal()
    by_seq = {e.seq: e for e in AuditEntry.objects.all()}
    with connection.cursor() as cursor:
        # 3: the hashed body edited; 6: deleted; 9: only the searchable jsonb copy edited.
        cursor.execute(
            "UPDATE audit_auditentry SET body = replace(body, '\"i\":', '\"i\": ') WHERE id = %s",
            [by_seq[3].pk],
        )
        cursor.execute("DELETE FROM audit_auditentry WHERE id = %s", [by_seq[6].pk])
        cursor.execute(
            "UPDATE audit_auditentry SET after = '{\"i\": 999}' WHERE id = %s", [by_seq[9].pk]
        )
    report = audit.verify_chain()
    assert not report.ok
    assert report.first_broken_seq == 3
    named = {p.seq for p in report.problems}
    assert {3, 6, 9} <= named, report.problems
    assert report.counts["edited"] == 2 and report.counts["missing"] == 1
    code, out = _verify_command(capsys)
    assert code == 1
    assert "BROKEN at entry #3" in out
    assert "entry #6 is missing" in out and "entry #9 content was changed" in out
    assert "3 problems" in out


def test_reordered_entries_are_found(capsys):
    _entries(6)
    audit.seal()
    a, b = AuditEntry.objects.get(seq=2), AuditEntry.objects.get(seq=4)
    with connection.cursor() as cursor:
        cursor.execute("UPDATE audit_auditentry SET seq = -1 WHERE id = %s", [a.pk])
        cursor.execute("UPDATE audit_auditentry SET seq = 2 WHERE id = %s", [b.pk])
        cursor.execute("UPDATE audit_auditentry SET seq = 4 WHERE id = %s", [a.pk])
    report = audit.verify_chain()
    assert not report.ok and report.first_broken_seq == 2
    assert {2, 4} <= {p.seq for p in report.problems}


def test_rewritten_checkpoint_is_found(capsys):
    _entries(4)
    audit.seal()
    _entries(3)
    audit.seal()
    first, second = AuditCheckpoint.objects.order_by("number")
    assert (first.first_seq, first.last_seq, second.first_seq, second.last_seq) == (1, 4, 5, 7)
    # Changing the root alone breaks the checkpoint's own hash.
    AuditCheckpoint.objects.filter(pk=first.pk).update(merkle_root="ab" * 32)
    code, out = _verify_command(capsys)
    assert code == 1 and "checkpoint 1 was rewritten" in out
    # Recomputing its hash too breaks the next checkpoint's link and the match with the
    # entries it covers.
    fields = {
        "number": 1,
        "first_seq": 1,
        "last_seq": 4,
        "last_entry_hash": first.last_entry_hash,
        "merkle_root": "ab" * 32,
        "prev_hash": first.prev_hash,
    }
    AuditCheckpoint.objects.filter(pk=first.pk).update(hash=audit.checkpoint_hash(**fields))
    report = audit.verify_chain()
    messages = " | ".join(p.message for p in report.problems)
    assert "checkpoint 2 does not link" in messages
    assert "checkpoint 1 does not match entries #1-#4" in messages


def test_deleted_checkpoint_and_anchor(capsys):
    _entries(3)
    audit.seal()
    anchor = AuditCheckpoint.objects.get(number=1)
    code, out = _verify_command(capsys, "--anchor", f"1:{anchor.hash}")
    assert code == 0, out
    AuditCheckpoint.objects.filter(pk=anchor.pk).delete()
    code, out = _verify_command(capsys, "--anchor", f"1:{anchor.hash}")
    assert code == 1
    assert "covered by no checkpoint" in out and "checkpoint 1 no longer exists" in out


def test_unsealed_entries_older_than_the_bound_are_reported(capsys):
    audit.record(actor=None, action="test.late", object_type="test", object_id=1)
    report = audit.verify_chain()
    assert report.ok and report.unsealed == 1  # young: waiting, not a break
    later = timezone.now() + timedelta(hours=2)
    report = audit.verify_chain(now=later, max_unsealed_age=timedelta(minutes=10))
    assert not report.ok and report.counts == {"unsealed": 1}
    code, out = _verify_command(capsys, "--max-unsealed-age", "0")
    assert code == 1 and "not sealed" in out
    audit.seal()
    assert audit.verify_chain(now=later).ok


# RFC 6962 Merkle tree hashes of the first n of these leaves, from the certificate-
# transparency reference implementation's test vectors (from memory); a direct recursive
# implementation of the RFC's definition below checks them as well.
CT_LEAVES = [
    "",
    "00",
    "10",
    "2021",
    "3031",
    "40414243",
    "5051525354555657",
    "606162636465666768696a6b6c6d6e6f",
]
CT_ROOTS = [
    "6e340b9cffb37a989ca544e6bb780a2c78901d3fb33738768511a30617afa01d",
    "fac54203e7cc696cf0dfcb42c92a1d9dbaf70ad9e621f4bd8d98662f00e3c125",
    "aeb6bcfe274b70a14fb067a5e5578264db0fa9b51af5e0ba159158f329e06e77",
    "d37ee418976dd95753c1c73862b9398fa2a2cf9b4ff0fdfe8b30cd95209614b7",
    "4e3bbb1f7b478dcfe71fb631631519a3bca12c9aefca1612bfce4c13a86264d4",
    "76e67dadbcdf1e10e1b74ddc608abd2f98dfb16fbce75277b5232a127f2087ef",
    "ddb89be403809e325750d3d263cd78929c2942b7942a34b77e122c9594a74c8c",
    "5dc9da79a70659a9ad559cb701ded9a2ab9d823aad2f4960cfe370eff4604328",
]


def _rfc6962_mth(leaves: list[bytes]) -> bytes:
    """MTH(D[n]) exactly as RFC 6962 section 2.1 defines it (split at the largest power
    of two smaller than n)."""
    if not leaves:
        return hashlib.sha256(b"").digest()
    if len(leaves) == 1:
        return hashlib.sha256(b"\x00" + leaves[0]).digest()
    k = 1
    while k * 2 < len(leaves):
        k *= 2
    return hashlib.sha256(b"\x01" + _rfc6962_mth(leaves[:k]) + _rfc6962_mth(leaves[k:])).digest()


@pytest.mark.parametrize("n", range(1, 9))
def test_streaming_merkle_root_is_rfc6962(n):
    tree = audit.MerkleBuilder()
    for leaf in CT_LEAVES[:n]:
        tree.add(leaf)
    assert tree.root() == CT_ROOTS[n - 1]
    assert tree.root() == _rfc6962_mth([bytes.fromhex(x) for x in CT_LEAVES[:n]]).hex()


def test_streaming_merkle_root_matches_the_definition_for_odd_sizes():
    leaves = [hashlib.sha256(str(i).encode()).hexdigest() for i in range(1000)]
    for n in (9, 31, 100, 513, 1000):
        tree = audit.MerkleBuilder()
        for leaf in leaves[:n]:
            tree.add(leaf)
        assert tree.root() == _rfc6962_mth([bytes.fromhex(x) for x in leaves[:n]]).hex()


def _bulk_sealed(n: int) -> None:
    """n entries written in one statement, then sealed (a stand-in for a long trail)."""
    with connection.cursor() as cursor:
        cursor.execute(
            "INSERT INTO audit_auditentry (at, actor_name, action, object_type, object_id, "
            "after, body) SELECT now(), 'system', 'test.bulk', 'test', g::text, "
            'jsonb_build_object(\'i\', g), \'{"action":"test.bulk","actor_id":null,'
            '"actor_name":"system","after":{"i":\' || g || \'},"at":"\' || '
            "to_char(now() AT TIME ZONE 'UTC', 'YYYY-MM-DD\"T\"HH24:MI:SS.US') || "
            '\'+00:00","before":null,"object_id":"\' || g || \'","object_type":"test"}\' '
            "FROM generate_series(1, %s) AS g",
            [n],
        )
    audit.seal(batch=20000)


def _peak_verify_bytes() -> tuple[int, audit.ChainReport]:
    tracemalloc.start()
    try:
        report = audit.verify_chain()
        return tracemalloc.get_traced_memory()[1], report
    finally:
        tracemalloc.stop()


def test_verifier_memory_does_not_grow_with_the_trail():
    _bulk_sealed(4000)
    small, report = _peak_verify_bytes()
    assert report.ok and report.checked == 4000, report.problems
    _bulk_sealed(16000)
    large, report = _peak_verify_bytes()
    assert report.ok and report.checked == 20000, report.problems
    # Five times the entries, streamed in fixed chunks: the peak stays about the same.
    assert large < small * 1.5, (small, large)


@pytest.mark.django_db(transaction=True)
def test_writers_share_no_lock_and_sealing_skips_no_open_transaction():
    """A writer holding its transaction open blocks neither another writer nor the sealer;
    its entry is sealed by the first pass after it commits, none is skipped."""
    written = threading.Event()
    release = threading.Event()
    errors: list[BaseException] = []

    def slow_writer() -> None:
        try:
            with transaction.atomic():
                audit.record(actor=None, action="test.slow", object_type="test", object_id=1)
                written.set()
                assert release.wait(20)
        except BaseException as exc:  # reported by the main thread
            errors.append(exc)
        finally:
            connection.close()

    worker = threading.Thread(target=slow_writer)
    worker.start()
    try:
        assert written.wait(20)
        # Another writer commits at once (it would wait here if appends shared a lock).
        with connection.cursor() as cursor:
            cursor.execute("SET lock_timeout = '2s'")
        with transaction.atomic():
            audit.record(actor=None, action="test.fast", object_type="test", object_id=2)
        first = audit.seal()
        assert first.sealed == 1
        assert AuditEntry.objects.get(action="test.fast").seq == 1
    finally:
        release.set()
        worker.join(30)
    assert not errors, errors
    second = audit.seal()
    assert second.sealed == 1 and AuditEntry.objects.get(action="test.slow").seq == 2
    assert AuditEntry.objects.aggregate(m=Max("seq"))["m"] == 2
    assert audit.verify_chain().ok


def test_migration_recovers_the_bytes_jsonb_changed():
    """A legacy entry hashed with -0.0 that jsonb stored as 0 verifies after the migration."""
    migration = importlib.import_module("shopfloor.audit.migrations.0003_sealed_chain")
    content = {
        "at": "2026-01-01T00:00:00+00:00",
        "actor_id": None,
        "actor_name": "system",
        "action": "reading.recorded",
        "object_type": "reading",
        "object_id": "7",
        "before": None,
        "after": {"value": -0.0, "other": 0.0},
    }
    legacy_hash = audit.chain_hash(audit.GENESIS, audit.canonical_json(content), 1)

    class Legacy:
        prev_hash = audit.GENESIS
        seq = 1
        hash = legacy_hash

    as_stored = {**content, "after": {"value": 0.0, "other": 0.0}}
    body = migration._recover_body(as_stored, Legacy)
    assert body == audit.canonical_json(content)
