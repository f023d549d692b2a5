"""Append to the audit trail, seal it into one chain, verify it, and make e-signatures.

Writing: `record()` is one INSERT in the caller's transaction and takes no lock that
another writer needs. The entry's content is written as canonical JSON text (`body`):
sorted keys, no spaces, ASCII with \\u escapes, floats as Python's shortest round-trip
repr (so -0.0 stays "-0.0" and 1e-07 stays "1e-07"). The hash covers exactly those
stored bytes, so no database type conversion (jsonb turns -0.0 into 0 and 1.10 into 1.1)
can change what is verified.

Sealing: `seal()` (the `seal_audit` beat task, `manage.py audit seal`) is the only code
that locks the AuditHead row. It takes the unsealed entries it can see, in id order,
gives each the next `seq` and `hash = sha256(prev_hash || sealed text)`, where the sealed
text is the body with `"seq":n` added as its last key (the canonical JSON of the whole
entry; the first entry's prev_hash is 64 zeros), and closes the pass with a checkpoint:
the RFC 6962 Merkle tree hash of the pass's entry hashes, chained to the previous
checkpoint. An entry committed while a pass runs is invisible to it and is sealed by the
next pass, so no entry is ever skipped and none is sealed twice (the head lock).

Verifying: `verify_chain()` streams the sealed entries and the checkpoints over
server-side cursors (memory does not grow with the trail), reports every break (missing,
edited, relinked or reordered entries, columns that disagree with the hashed body,
rewritten or missing checkpoints) with the first one named, and counts entries left
unsealed longer than `AUDIT_SEAL_MAX_DELAY_SECONDS`.
"""

from __future__ import annotations

import hashlib
import json
import logging
import math
from collections import Counter
from collections.abc import Iterator
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from typing import Any

from django.conf import settings
from django.db import connection, transaction
from django.utils import timezone

from shopfloor.audit.models import AuditCheckpoint, AuditEntry, AuditHead, Signature

log = logging.getLogger("shopfloor.audit")

GENESIS = "0" * 64
SEAL_BATCH = 5000  # entries per sealing pass (one checkpoint each)
MAX_REPORTED = 50  # problems listed in detail; all are counted


# --- canonical form -------------------------------------------------------------------


def canonical_json(value: Any) -> str:
    """Stable JSON: sorted keys, no spaces, ASCII, datetimes as ISO strings in UTC.

    A float that is not finite (which JSON cannot carry) is written as its name in a
    string, so an odd value can never make an audit append fail.
    """
    return json.dumps(
        _finite(value),
        sort_keys=True,
        separators=(",", ":"),
        ensure_ascii=True,
        allow_nan=False,
        default=_json_default,
    )


def _finite(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return repr(value)
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_finite(v) for v in value]
    return value


def _json_default(value: Any) -> Any:
    if isinstance(value, datetime):
        return value.astimezone(UTC).isoformat()
    return str(value)


def sha256_hex(text: str) -> str:
    return hashlib.sha256(text.encode()).hexdigest()


def sealed_text(body: str, seq: int) -> str:
    """The canonical JSON of the whole entry: its body with "seq" as the last key.

    Every content key sorts before "seq", so this equals canonical_json of the content
    with seq added, built from the stored bytes without parsing them.
    """
    if not (body.startswith("{") and body.endswith("}")) or body == "{}":
        return body + f"|seq={seq}"  # not an object: hash it as it is, it will not verify
    return f'{body[:-1]},"seq":{int(seq)}}}'


def chain_hash(prev_hash: str, body: str, seq: int) -> str:
    return sha256_hex(prev_hash + sealed_text(body, seq))


def entry_content(entry: AuditEntry) -> dict[str, Any]:
    """The entry's hashed content (parsed from its stored body) with its place in the chain."""
    content: dict[str, Any] = json.loads(entry.body) if entry.body else _content_from_columns(entry)
    content["seq"] = entry.seq
    return content


def _content_from_columns(entry: AuditEntry) -> dict[str, Any]:
    return {
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


# --- writing --------------------------------------------------------------------------


def record(
    *,
    actor: Any,
    action: str,
    object_type: str,
    object_id: object,
    before: dict[str, Any] | None = None,
    after: dict[str, Any] | None = None,
) -> AuditEntry:
    """Append one audit entry inside the caller's transaction: one INSERT, no shared lock.

    The entry is sealed into the chain shortly after commit by the sealing task (at once
    after commit in the embedded mode, where no beat runs).
    """
    entry = _new_entry(actor, action, object_type, object_id, before, after)
    if connection.vendor == "postgresql":
        entry.pk = _insert_rows([entry])[0]
        entry._state.adding = False
        entry._state.db = "default"
    else:
        entry.save(force_insert=True)
    _seal_after_commit_if_embedded()
    return entry


@dataclass(frozen=True)
class Change:
    """One entry for `record_many`: the same fields `record` takes."""

    action: str
    object_type: str
    object_id: object
    before: dict[str, Any] | None = None
    after: dict[str, Any] | None = None


def record_many(actor: Any, changes: list[Change]) -> list[int]:
    """Append several entries by one actor in a single INSERT (batch posts); their ids."""
    if not changes:
        return []
    entries = [
        _new_entry(actor, c.action, c.object_type, c.object_id, c.before, c.after) for c in changes
    ]
    if connection.vendor == "postgresql":
        ids = _insert_rows(entries)
    else:
        ids = [e.pk for e in AuditEntry.objects.bulk_create(entries)]
    _seal_after_commit_if_embedded()
    return ids


def _new_entry(
    actor: Any,
    action: str,
    object_type: str,
    object_id: object,
    before: dict[str, Any] | None,
    after: dict[str, Any] | None,
) -> AuditEntry:
    now = timezone.now()
    actor_id = actor.pk if getattr(actor, "pk", None) else None
    body = canonical_json(
        {
            "at": now,
            "actor_id": actor_id,
            "actor_name": _actor_name(actor),
            "action": action,
            "object_type": object_type,
            "object_id": str(object_id),
            "before": before,
            "after": after,
        }
    )
    content = json.loads(body)
    return AuditEntry(
        at=now,
        actor_id=actor_id,
        actor_name=content["actor_name"],
        action=action,
        object_type=object_type,
        object_id=content["object_id"],
        before=content["before"],
        after=content["after"],
        body=body,
    )


def _insert_rows(entries: list[AuditEntry]) -> list[int]:
    """One INSERT for all entries (arrays unnested in order); the jsonb copies are parsed
    from the same canonical text as the body."""
    sql, params = insert_statement(entries)
    with connection.cursor() as cursor:
        cursor.execute(sql + " RETURNING id", params)
        return [r[0] for r in cursor.fetchall()]


def new_entry(
    actor: Any,
    action: str,
    object_type: str,
    object_id: object,
    after: dict[str, Any] | None = None,
    before: dict[str, Any] | None = None,
) -> AuditEntry:
    """An unsaved entry, for a caller that writes it in its own statement with
    `insert_statement` (and calls `appended()` once it has)."""
    return _new_entry(actor, action, object_type, object_id, before, after)


def appended() -> None:
    """What follows an append made with `insert_statement` (sealing after commit where no
    beat runs)."""
    _seal_after_commit_if_embedded()


def insert_statement(entries: list[AuditEntry]) -> tuple[str, list[Any]]:
    """The one INSERT of `entries` (PostgreSQL; usable inside a WITH) and its parameters."""
    columns: list[list[Any]] = [[] for _ in range(9)]
    for e in entries:
        values = (
            e.at,
            e.actor_id,
            e.actor_name,
            e.action,
            e.object_type,
            e.object_id,
            _json_param(e.before),
            _json_param(e.after),
            e.body,
        )
        for column, value in zip(columns, values, strict=True):
            column.append(value)
    sql = (
        "INSERT INTO audit_auditentry (at, actor_id, actor_name, action, object_type, "
        "object_id, before, after, body) "
        "SELECT at, actor_id, actor_name, action, object_type, object_id, "
        "before::jsonb, after::jsonb, body FROM unnest(%s::timestamptz[], %s::bigint[], "
        "%s::text[], %s::text[], %s::text[], %s::text[], %s::text[], %s::text[], %s::text[]) "
        "WITH ORDINALITY AS v(at, actor_id, actor_name, action, object_type, object_id, "
        "before, after, body, n) ORDER BY n"
    )
    return sql, list(columns)


def _seal_after_commit_if_embedded() -> None:
    if connection.vendor != "postgresql" or settings.CELERY_TASK_ALWAYS_EAGER:
        # No beat runs in the embedded mode: seal right after this commit instead.
        transaction.on_commit(seal)


def _json_param(value: Any) -> str | None:
    return None if value is None else canonical_json(value)


def _actor_name(actor: Any) -> str:
    if actor is None:
        return "system"
    person = getattr(actor, "person", None)
    if person is not None:
        return f"{person.printed_name} ({person.badge_number})"
    return str(getattr(actor, "username", actor))


# --- sealing --------------------------------------------------------------------------


def merkle_leaf(entry_hash_hex: str) -> bytes:
    """RFC 6962 section 2.1: a leaf hash is SHA-256(0x00 || leaf data)."""
    return hashlib.sha256(b"\x00" + bytes.fromhex(entry_hash_hex)).digest()


def _merkle_node(left: bytes, right: bytes) -> bytes:
    """RFC 6962 section 2.1: an interior node is SHA-256(0x01 || left || right)."""
    return hashlib.sha256(b"\x01" + left + right).digest()


class MerkleBuilder:
    """RFC 6962 Merkle tree hash of a stream of leaves in O(log n) memory.

    The tree splits at the largest power of two below n, so complete subtrees on the
    left can be merged as soon as two of equal size meet; what is left at the end is
    folded from the right.
    """

    def __init__(self) -> None:
        self._stack: list[tuple[int, bytes]] = []
        self.count = 0

    def add(self, entry_hash_hex: str) -> None:
        size, node = 1, merkle_leaf(entry_hash_hex)
        while self._stack and self._stack[-1][0] == size:
            left_size, left = self._stack.pop()
            size, node = left_size + size, _merkle_node(left, node)
        self._stack.append((size, node))
        self.count += 1

    def root(self) -> str:
        if not self._stack:
            return hashlib.sha256(b"").hexdigest()  # RFC 6962: the hash of an empty tree
        node = self._stack[-1][1]
        for _size, left in reversed(self._stack[:-1]):
            node = _merkle_node(left, node)
        return node.hex()


def checkpoint_hash(
    *,
    number: int,
    first_seq: int,
    last_seq: int,
    last_entry_hash: str,
    merkle_root: str,
    prev_hash: str,
) -> str:
    text = canonical_json(
        {
            "number": number,
            "first_seq": first_seq,
            "last_seq": last_seq,
            "last_entry_hash": last_entry_hash,
            "merkle_root": merkle_root,
        }
    )
    return sha256_hex(prev_hash + text)


@dataclass(frozen=True)
class SealReport:
    sealed: int
    checkpoints: int
    last_seq: int
    last_checkpoint_hash: str | None


def seal(*, batch: int = SEAL_BATCH, max_passes: int = 100) -> SealReport:
    """Chain every entry that is committed and not sealed yet (bounded passes)."""
    sealed = passes = 0
    last_seq, last_cp = 0, None
    for _ in range(max_passes):
        count, last_seq, cp_hash = _seal_pass(batch)
        if count == 0:
            break
        sealed += count
        passes += 1
        last_cp = cp_hash
        if count < batch:
            break
    if passes:
        log.info(
            "audit sealed %s entries through #%s; latest checkpoint %s", sealed, last_seq, last_cp
        )
    return SealReport(sealed, passes, last_seq, last_cp)


def _lock_head() -> AuditHead:
    AuditHead.objects.get_or_create(pk=1, defaults={"last_seq": 0, "last_hash": GENESIS})
    return AuditHead.objects.select_for_update().get(pk=1)


def _seal_pass(batch: int) -> tuple[int, int, str | None]:
    with transaction.atomic():
        head = _lock_head()
        rows = list(
            AuditEntry.objects.filter(seq__isnull=True)
            .order_by("id")
            .values_list("id", "body")[:batch]
        )
        if not rows:
            return 0, head.last_seq, None
        seq, prev = head.last_seq, head.last_hash
        first_seq = seq + 1
        tree = MerkleBuilder()
        updates: list[tuple[int, int, str, str]] = []
        for entry_id, body in rows:
            seq += 1
            digest = chain_hash(prev, body, seq)
            updates.append((entry_id, seq, prev, digest))
            tree.add(digest)
            prev = digest
        _write_seals(updates)
        last_cp = AuditCheckpoint.objects.order_by("-number").values_list("number", "hash").first()
        number = (last_cp[0] + 1) if last_cp else 1
        fields: dict[str, Any] = {
            "number": number,
            "first_seq": first_seq,
            "last_seq": seq,
            "last_entry_hash": prev,
            "merkle_root": tree.root(),
            "prev_hash": last_cp[1] if last_cp else GENESIS,
        }
        cp = AuditCheckpoint.objects.create(**fields, hash=checkpoint_hash(**fields))
        head.last_seq, head.last_hash = seq, prev
        head.save(update_fields=["last_seq", "last_hash"])
        return len(rows), seq, cp.hash


def _write_seals(updates: list[tuple[int, int, str, str]]) -> None:
    if connection.vendor == "postgresql":
        with connection.cursor() as cursor:
            cursor.execute(
                "UPDATE audit_auditentry e SET seq = v.seq, prev_hash = v.prev, hash = v.hash "
                "FROM unnest(%s::bigint[], %s::bigint[], %s::text[], %s::text[]) "
                "AS v(id, seq, prev, hash) WHERE e.id = v.id AND e.seq IS NULL",
                [
                    [u[0] for u in updates],
                    [u[1] for u in updates],
                    [u[2] for u in updates],
                    [u[3] for u in updates],
                ],
            )
        return
    for entry_id, seq, prev, digest in updates:
        AuditEntry.objects.filter(pk=entry_id, seq__isnull=True).update(
            seq=seq, prev_hash=prev, hash=digest
        )


# --- verifying ------------------------------------------------------------------------


@dataclass(frozen=True)
class Problem:
    seq: int | None
    kind: str
    message: str


@dataclass
class ChainReport:
    """What `verify_chain` found; `problems` lists the first MAX_REPORTED, `counts` all."""

    ok: bool
    checked: int
    first_broken_seq: int | None
    problem: str
    problems: list[Problem] = field(default_factory=list)
    counts: dict[str, int] = field(default_factory=dict)
    checkpoints_checked: int = 0
    last_checkpoint: tuple[int, str] | None = None
    unsealed: int = 0
    unsealed_overdue: int = 0

    def summary(self) -> str:
        if self.ok:
            text = f"{self.checked} entries and {self.checkpoints_checked} checkpoints intact"
        else:
            kinds = ", ".join(f"{n} {kind}" for kind, n in sorted(self.counts.items()))
            text = f"{sum(self.counts.values())} problems ({kinds})"
        if self.unsealed:
            text += f"; {self.unsealed} entries waiting to be sealed"
        return text


class _Findings:
    def __init__(self) -> None:
        self.problems: list[Problem] = []
        self.counts: Counter[str] = Counter()
        self.first_seq: int | None = None
        self.first_message = ""

    def add(self, seq: int | None, kind: str, message: str) -> None:
        self.counts[kind] += 1
        if not self.first_message:
            self.first_seq, self.first_message = seq, message
        if len(self.problems) < MAX_REPORTED:
            self.problems.append(Problem(seq, kind, message))


_ENTRY_FIELDS = (
    "seq",
    "prev_hash",
    "hash",
    "body",
    "at",
    "actor_id",
    "actor_name",
    "action",
    "object_type",
    "object_id",
    "before",
    "after",
)


def _stream(queryset: Any, chunk: int = 2000) -> Iterator[Any]:
    """Rows over a server-side cursor on PostgreSQL (Django's iterator), in chunks."""
    rows: Iterator[Any] = queryset.iterator(chunk_size=chunk)
    return rows


def json_same(a: Any, b: Any) -> bool:
    """Equal as JSON values: numbers by value (jsonb's -0 and 1.10 are 0 and 1.1), but
    never a boolean for a number or a string for either."""
    if isinstance(a, bool) or isinstance(b, bool):
        return type(a) is type(b) and a == b
    if isinstance(a, int | float) and isinstance(b, int | float):
        return float(a) == float(b)
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(json_same(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(json_same(x, y) for x, y in zip(a, b, strict=True))
    return type(a) is type(b) and a == b


def _columns_disagree(row: tuple[Any, ...]) -> list[str]:
    _seq, _p, _h, body, at, actor_id, actor_name, action, otype, oid, before, after = row
    try:
        content = json.loads(body)
    except ValueError:
        return ["body"]
    if not isinstance(content, dict):
        return ["body"]
    wrong = []
    if at is None or at.astimezone(UTC).isoformat() != content.get("at"):
        wrong.append("at")
    for name, value in (
        ("actor_id", actor_id),
        ("actor_name", actor_name),
        ("action", action),
        ("object_type", otype),
        ("object_id", oid),
    ):
        if not json_same(value, content.get(name)):
            wrong.append(name)
    for name, value in (("before", before), ("after", after)):
        if not json_same(value, content.get(name)):
            wrong.append(name)
    return wrong


def verify_chain(
    *, now: datetime | None = None, max_unsealed_age: timedelta | None = None
) -> ChainReport:
    """Walk the whole sealed trail and its checkpoints in order; report every break.

    Runs in one REPEATABLE READ snapshot (when called outside a transaction), so a
    sealing pass that commits meanwhile cannot make the head look ahead of the entries.
    """
    if connection.in_atomic_block or connection.vendor != "postgresql":
        return _verify(now, max_unsealed_age)
    with transaction.atomic():
        with connection.cursor() as cursor:
            cursor.execute("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ READ ONLY")
        return _verify(now, max_unsealed_age)


def _verify(now: datetime | None, max_unsealed_age: timedelta | None) -> ChainReport:
    found = _Findings()
    prev_hash = GENESIS
    expected = 1
    checked = 0
    entries = _stream(
        AuditEntry.objects.filter(seq__isnull=False).order_by("seq").values_list(*_ENTRY_FIELDS)
    )
    checkpoints = _stream(
        AuditCheckpoint.objects.order_by("number").values_list(
            "number", "first_seq", "last_seq", "last_entry_hash", "merkle_root", "prev_hash", "hash"
        ),
        chunk=500,
    )
    cps = _CheckpointWalk(checkpoints, found)
    for row in entries:
        seq, stored_prev, stored_hash, body = row[0], row[1], row[2], row[3]
        if seq > expected:
            gap = f"#{expected}" if seq == expected + 1 else f"#{expected} to #{seq - 1}"
            found.add(
                expected,
                "missing",
                f"entry {gap} is missing (the next stored entry is #{seq})",
            )
        elif stored_prev != prev_hash:
            found.add(
                seq,
                "relinked",
                f"entry #{seq} does not link to the entry before it (edited, reordered or "
                "inserted)",
            )
        if chain_hash(stored_prev or "", body, seq) != stored_hash:
            found.add(seq, "edited", f"entry #{seq} content was changed after writing")
        else:
            wrong = _columns_disagree(row)
            if wrong:
                found.add(
                    seq,
                    "edited",
                    f"entry #{seq} content was changed after writing (columns "
                    f"{', '.join(wrong)} disagree with the sealed content)",
                )
        cps.entry(seq, stored_hash or "")
        prev_hash = stored_hash or ""
        expected = seq + 1
        checked += 1
    last_seq = expected - 1
    head = AuditHead.objects.filter(pk=1).values_list("last_seq", flat=True).first()
    recorded = max(head or 0, cps.last_seq_covered)
    if recorded > last_seq:
        gap = f"#{last_seq + 1}" if recorded == last_seq + 1 else f"#{last_seq + 1} to #{recorded}"
        found.add(
            last_seq + 1,
            "missing",
            f"entry {gap} is missing: entries after #{last_seq} were removed (the trail "
            f"recorded #{recorded})",
        )
    cps.finish()
    unsealed, overdue = _unsealed(now, max_unsealed_age)
    if overdue:
        found.add(
            None,
            "unsealed",
            f"{overdue} entries are older than the sealing bound and still not sealed (is the "
            "sealing task running? an open transaction holds them back)",
        )
    return ChainReport(
        ok=not found.counts,
        checked=checked,
        first_broken_seq=found.first_seq,
        problem=found.first_message or "intact",
        problems=found.problems,
        counts=dict(found.counts),
        checkpoints_checked=cps.checked,
        last_checkpoint=cps.last,
        unsealed=unsealed,
        unsealed_overdue=overdue,
    )


def _unsealed(now: datetime | None, bound: timedelta | None) -> tuple[int, int]:
    now = now or timezone.now()
    if bound is None:
        bound = timedelta(seconds=settings.AUDIT_SEAL_MAX_DELAY_SECONDS)
    waiting = AuditEntry.objects.filter(seq__isnull=True)
    return waiting.count(), waiting.filter(at__lt=now - bound).count()


class _CheckpointWalk:
    """Checks the checkpoint chain alongside the entry stream, one checkpoint at a time."""

    def __init__(self, rows: Iterator[Any], found: _Findings) -> None:
        self.rows = rows
        self.found = found
        self.checked = 0
        self.last: tuple[int, str] | None = None
        self.last_seq_covered = 0
        self.prev_hash = GENESIS
        self.expected_number = 1
        self.expected_first = 1
        self.current: tuple[Any, ...] | None = None
        self.tree = MerkleBuilder()
        self.uncovered = 0
        self.first_uncovered: int | None = None
        self._next()

    def _next(self) -> None:
        self.current = next(self.rows, None)
        self.tree = MerkleBuilder()
        if self.current is None:
            return
        number, first, last, last_entry, root, prev, digest = self.current
        self.checked += 1
        self.last = (number, digest)
        self.last_seq_covered = max(self.last_seq_covered, last)
        name = f"checkpoint {number}"
        if number != self.expected_number:
            self.found.add(
                first,
                "checkpoint",
                f"checkpoint {self.expected_number} is missing ({name} follows)",
            )
        if prev != self.prev_hash:
            self.found.add(first, "checkpoint", f"{name} does not link to the checkpoint before it")
        fields = {
            "number": number,
            "first_seq": first,
            "last_seq": last,
            "last_entry_hash": last_entry,
            "merkle_root": root,
            "prev_hash": prev,
        }
        if checkpoint_hash(**fields) != digest:
            self.found.add(first, "checkpoint", f"{name} was rewritten (its hash does not match)")
        if first != self.expected_first:
            self.found.add(
                first,
                "checkpoint",
                f"{name} covers #{first}-#{last} but should start at #{self.expected_first}",
            )
        self.prev_hash = digest
        self.expected_number = number + 1
        self.expected_first = last + 1

    def entry(self, seq: int, digest: str) -> None:
        while self.current is not None and seq > self.current[2]:
            self._close()
        if self.current is None:
            self.uncovered += 1
            self.first_uncovered = self.first_uncovered or seq
            return
        if seq >= self.current[1]:
            self.tree.add(digest)
            if seq == self.current[2]:
                self._close(last_digest=digest)

    def _close(self, last_digest: str | None = None) -> None:
        assert self.current is not None
        number, first, last, last_entry, root, _prev, _digest = self.current
        if self.tree.count != last - first + 1:
            pass  # entries of this range are missing, and reported as such
        elif self.tree.root() != root or last_digest != last_entry:
            self.found.add(
                first,
                "checkpoint",
                f"checkpoint {number} does not match entries #{first}-#{last} (the entries or "
                "the checkpoint were rewritten)",
            )
        self._next()

    def finish(self) -> None:
        while self.current is not None:
            self._close()
        if self.uncovered:
            self.found.add(
                self.first_uncovered,
                "checkpoint",
                f"{self.uncovered} sealed entries from #{self.first_uncovered} on are covered by "
                "no checkpoint (a checkpoint was deleted)",
            )


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
