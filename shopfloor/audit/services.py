"""Append to the audit trail, verify it, and make e-signatures.

The hash of entry n is sha256(prev_hash || canonical JSON of its content); the first
entry's prev_hash is 64 zeros. Appends lock the single AuditHead row, so concurrent
transactions chain in commit order and never fork the chain.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from django.db import connection, transaction
from django.utils import timezone

from shopfloor.audit.models import AuditEntry, AuditHead, Signature

GENESIS = "0" * 64


def canonical_json(value: Any) -> str:
    """Stable JSON: sorted keys, no spaces, datetimes as ISO strings in UTC."""
    return json.dumps(value, sort_keys=True, separators=(",", ":"), default=_json_default)


def _json_default(value: Any) -> Any:
    if isinstance(value, datetime):
        return value.astimezone(UTC).isoformat()
    return str(value)


def sha256_hex(text: str) -> str:
    return hashlib.sha256(text.encode()).hexdigest()


def entry_content(entry: AuditEntry) -> dict[str, Any]:
    return {
        "seq": entry.seq,
        "at": entry.at.astimezone(UTC).isoformat(),
        "actor_id": entry.actor_id,
        "actor_name": entry.actor_name,
        "action": entry.action,
        "object_type": entry.object_type,
        "object_id": entry.object_id,
        "before": entry.before,
        "after": entry.after,
    }


def entry_hash(prev_hash: str, content: dict[str, Any]) -> str:
    return sha256_hex(prev_hash + canonical_json(content))


def record(
    *,
    actor: Any,
    action: str,
    object_type: str,
    object_id: object,
    before: dict[str, Any] | None = None,
    after: dict[str, Any] | None = None,
) -> AuditEntry:
    """Append one audit entry inside the caller's transaction.

    Two statements: an UPDATE that takes the next number (and locks the head row until
    the caller commits), then the INSERT of the entry, which also moves the head's hash.
    """
    with transaction.atomic(savepoint=False):
        seq, prev_hash = _take_next_seq()
        entry = AuditEntry(
            seq=seq,
            at=timezone.now(),
            actor=actor if getattr(actor, "pk", None) else None,
            actor_name=_actor_name(actor),
            action=action,
            object_type=object_type,
            object_id=str(object_id),
            before=json.loads(canonical_json(before)) if before is not None else None,
            after=json.loads(canonical_json(after)) if after is not None else None,
            prev_hash=prev_hash,
        )
        entry.hash = entry_hash(entry.prev_hash, entry_content(entry))
        _insert_and_move_head(entry)
        return entry


def _take_next_seq() -> tuple[int, str]:
    """Reserve the next sequence number; returns it with the previous entry's hash."""
    with connection.cursor() as cursor:
        for _attempt in range(2):
            cursor.execute(
                "UPDATE audit_audithead SET last_seq = last_seq + 1 WHERE id = 1 "
                "RETURNING last_seq, last_hash"
            )
            row = cursor.fetchone()
            if row is not None:
                return int(row[0]), str(row[1])
            # First entry ever: create the head, then take the number as usual.
            cursor.execute(
                "INSERT INTO audit_audithead (id, last_seq, last_hash) VALUES (1, 0, %s) "
                "ON CONFLICT (id) DO NOTHING",
                [GENESIS],
            )
    raise RuntimeError("the audit head row could not be created")


def _insert_and_move_head(entry: AuditEntry) -> None:
    if connection.vendor != "postgresql":  # the embedded demo database: two statements
        entry.save(force_insert=True)
        AuditHead.objects.filter(pk=1).update(last_hash=entry.hash)
        return
    with connection.cursor() as cursor:
        cursor.execute(
            "WITH moved AS (UPDATE audit_audithead SET last_hash = %s WHERE id = 1) "
            "INSERT INTO audit_auditentry (seq, at, actor_id, actor_name, action, object_type, "
            "object_id, before, after, prev_hash, hash) "
            "VALUES (%s, %s, %s, %s, %s, %s, %s, %s::jsonb, %s::jsonb, %s, %s) RETURNING id",
            [
                entry.hash,
                entry.seq,
                entry.at,
                entry.actor_id,
                entry.actor_name,
                entry.action,
                entry.object_type,
                entry.object_id,
                _json_param(entry.before),
                _json_param(entry.after),
                entry.prev_hash,
                entry.hash,
            ],
        )
        entry.pk = cursor.fetchone()[0]
    entry._state.adding = False
    entry._state.db = "default"


def _json_param(value: Any) -> str | None:
    return None if value is None else canonical_json(value)


def _actor_name(actor: Any) -> str:
    if actor is None:
        return "system"
    person = getattr(actor, "person", None)
    if person is not None:
        return f"{person.printed_name} ({person.badge_number})"
    return str(getattr(actor, "username", actor))


@dataclass(frozen=True)
class ChainReport:
    ok: bool
    checked: int
    first_broken_seq: int | None
    problem: str


def verify_chain() -> ChainReport:
    """Walk the whole trail in order; name the first entry whose hash or link is wrong."""
    prev_hash = GENESIS
    expected_seq = 1
    checked = 0
    for entry in AuditEntry.objects.order_by("seq").iterator(chunk_size=2000):
        if entry.seq != expected_seq:
            return ChainReport(
                False,
                checked,
                expected_seq,
                f"entry #{expected_seq} is missing (next stored entry is #{entry.seq})",
            )
        if entry.prev_hash != prev_hash:
            return ChainReport(
                False,
                checked,
                entry.seq,
                f"entry #{entry.seq} does not link to the entry before it",
            )
        if entry_hash(prev_hash, entry_content(entry)) != entry.hash:
            return ChainReport(
                False, checked, entry.seq, f"entry #{entry.seq} content was changed after writing"
            )
        prev_hash = entry.hash
        expected_seq += 1
        checked += 1
    head = AuditHead.objects.filter(pk=1).first()
    if head and head.last_seq != checked:
        return ChainReport(
            False,
            checked,
            checked + 1,
            f"entries after #{checked} were removed (the trail recorded #{head.last_seq})",
        )
    return ChainReport(True, checked, None, "intact")


def record_hash(record_type: str, record_id: object, content: dict[str, Any]) -> str:
    return sha256_hex(canonical_json({"type": record_type, "id": str(record_id), **content}))


def _signature_hash(sig: Signature) -> str:
    return sha256_hex(
        canonical_json(
            {
                "signer": sig.signer_id,
                "printed_name": sig.printed_name,
                "meaning": sig.meaning,
                "signed_at": sig.signed_at.astimezone(UTC).isoformat(),
                "record_type": sig.record_type,
                "record_id": sig.record_id,
                "record_hash": sig.record_hash,
            }
        )
    )


def sign(
    *, person: Any, meaning: str, record_type: str, record_id: object, content: dict[str, Any]
) -> Signature:
    """Make a signature bound to the record's content; caller checks the PIN first."""
    sig = Signature(
        signer=person,
        printed_name=person.printed_name,
        meaning=meaning,
        signed_at=timezone.now(),
        record_type=record_type,
        record_id=str(record_id),
        record_hash=record_hash(record_type, record_id, content),
    )
    sig.signature_hash = _signature_hash(sig)
    sig.save()
    record(
        actor=person.user,
        action="signature.made",
        object_type=record_type,
        object_id=record_id,
        after={"meaning": meaning, "printed_name": sig.printed_name, "signature": sig.pk},
    )
    return sig


def signature_valid(
    sig: Signature, *, record_type: str, record_id: object, content: dict[str, Any]
) -> bool:
    """True when the signature is intact and belongs to exactly this record's content."""
    return (
        sig.record_type == record_type
        and sig.record_id == str(record_id)
        and sig.record_hash == record_hash(record_type, record_id, content)
        and sig.signature_hash == _signature_hash(sig)
    )
