"""The reading POST on PostgreSQL: BEGIN, three statements, COMMIT.

1. **lock**: the lot step (by id, or as the current step of a lot code) and its lot,
   `FOR NO KEY UPDATE` (the lock that keeps a lot's order), whether an earlier step is
   still open and, with an Idempotency-Key, the transaction's advisory lock on the key
   (`pg_try_advisory_xact_lock`: a repeat still running gets 409 at once);
2. **read**, in a snapshot taken after those locks: the reply stored for the key, whether
   the person may record at the work center, whether an open hold names this step, the
   current sample set of the quantity (only this sample's row when no set criterion
   needs the rest), the gauge, and the ids the new reading and its outbox event will get
   (`nextval`);
3. **write**: one statement whose data-modifying CTEs insert the reading, its audit entry,
   its outbox event and the stored reply.

The read is its own statement on purpose: under READ COMMITTED a statement that waited
for a row lock still reads every other table in the snapshot it started with, so a read
folded into the lock statement would miss the reading that the lock's previous holder
just committed (two readings of one set would not see each other).

Everything in between is Python on values already in memory: the same parsing, typo
guard, judging and row builder as the ORM path (`readings`), which stays for
corrections and for databases other than PostgreSQL. Model instances are made with
`Model.from_db` from explicit column lists; no queryset is compiled per request.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

from django.contrib.auth import get_user_model
from django.contrib.auth.models import Group
from django.db import connection, models, transaction

from shopfloor.audit import services as audit
from shopfloor.errors import Conflict, DomainError, IdempotencyMismatch, NotFound
from shopfloor.floor import readings
from shopfloor.floor.idempotency import KEY_REUSED, STILL_RUNNING, Claim, Outcome
from shopfloor.floor.lookups import check_equipment, require_workable
from shopfloor.floor.models import IdempotencyRecord, LotStep, Reading
from shopfloor.plant.models import Equipment, Lot, Person
from shopfloor.plant.people import ANYWHERE_ROLES, check_assigned
from shopfloor.quality import outbox
from shopfloor.quality.models import Hold, OutboxEvent

CLOSED = (LotStep.Status.DONE.value, LotStep.Status.SKIPPED.value)

# The statements below are put together from the models' table and column names (never
# from input; every value is a bound parameter), hence the S608 exemption in pyproject.


def _columns(model: type[models.Model], alias: str) -> tuple[str, list[Any]]:
    fields = list(model._meta.concrete_fields)
    return ", ".join(f'{alias}."{f.column}"' for f in fields), fields


def _instance(model: type[models.Model], fields: Sequence[Any], values: Sequence[Any]) -> Any:
    """A model instance from a row, with the fields' database converters (JSON)."""
    converted = [
        f.from_db_value(v, None, connection) if v is not None and hasattr(f, "from_db_value") else v
        for f, v in zip(fields, values, strict=True)
    ]
    return model.from_db("default", [f.attname for f in fields], converted)


_STEP_COLS, _STEP_FIELDS = _columns(LotStep, "s")
_LOT_COLS, _LOT_FIELDS = _columns(Lot, "l")
_GAUGE_COLS, _GAUGE_FIELDS = _columns(Equipment, "g")
_STEP_T, _LOT_T = LotStep._meta.db_table, Lot._meta.db_table
_WC_FIELD = Person._meta.get_field("work_centers")
_PERSON_WC = (
    _WC_FIELD.m2m_db_table(),  # type: ignore[union-attr]
    _WC_FIELD.m2m_column_name(),  # type: ignore[union-attr]
    _WC_FIELD.m2m_reverse_name(),  # type: ignore[union-attr]
)

_LOCK = (
    f"SELECT {_STEP_COLS}, {_LOT_COLS}, "
    f"EXISTS (SELECT 1 FROM {_STEP_T} e WHERE e.lot_id = s.lot_id AND e.position < s.position "
    "AND e.status NOT IN (%s, %s)), {claim} "
    f"FROM {_STEP_T} s JOIN {_LOT_T} l ON l.id = s.lot_id WHERE {{where}} "
    "FOR NO KEY UPDATE OF s, l"
)
_BY_ID = "s.id = %s"
_BY_ID_AND_CODE = "s.id = %s AND UPPER(l.code::text) = UPPER(%s)"
_BY_CODE = (
    f"s.id = (SELECT c.id FROM {_STEP_T} c JOIN {_LOT_T} cl ON cl.id = c.lot_id "
    "WHERE UPPER(cl.code::text) = UPPER(%s) AND c.status NOT IN (%s, %s) "
    "ORDER BY c.position LIMIT 1)"
)

_READ = (
    "SELECT {stored}, "
    f"EXISTS (SELECT 1 FROM {_PERSON_WC[0]} pw WHERE pw.{_PERSON_WC[1]} = %s "
    f"AND pw.{_PERSON_WC[2]} = %s) "
    f"OR EXISTS (SELECT 1 FROM {get_user_model().groups.through._meta.db_table} ug "
    f"JOIN {Group._meta.db_table} gr ON gr.id = ug.group_id "
    "WHERE ug.user_id = %s AND gr.name = ANY(%s)), "
    f"EXISTS (SELECT 1 FROM {Hold._meta.db_table} h WHERE h.lot_id = %s AND h.lot_step_id = %s "
    "AND h.released_at IS NULL), "
    "(SELECT json_agg(json_build_array(r.sample_index, r.id, r.value)) "
    f"FROM {Reading._meta.db_table} r WHERE r.lot_step_id = %s AND r.quantity = %s "
    "AND r.superseded_by_id IS NULL AND (%s OR r.sample_index = %s)), "
    f"nextval(pg_get_serial_sequence('{Reading._meta.db_table}', 'id')), "
    f"nextval(pg_get_serial_sequence('{OutboxEvent._meta.db_table}', 'id')), "
    f"{_GAUGE_COLS} "
    f"FROM (SELECT 1) one LEFT JOIN {Equipment._meta.db_table} g ON g.id = %s"
)
_STORED = (
    "(SELECT json_build_array(i.fingerprint, i.status_code, i.body) "
    f"FROM {IdempotencyRecord._meta.db_table} i WHERE i.user_id = %s AND i.key = %s)"
)


@dataclass(frozen=True)
class Recorded:
    """The reading stored by this request (None for a replay) and the reply."""

    reading: Reading | None
    outcome: Outcome


@dataclass(frozen=True)
class Facts:
    """What the read statement found, in the snapshot taken after the locks."""

    stored: list[Any] | None
    assigned: bool
    held_here: bool
    current: dict[int, tuple[int, float]]
    reading_id: int
    event_id: int
    gauge: Equipment | None


def record(
    *,
    person: Person,
    data: readings.ReadingInput,
    via: str,
    lot_code: str | None = None,
    step_id: int | None = None,
    check_access: Callable[[LotStep], None] | None = None,
    claim: Claim | None = None,
    reply: Callable[[Reading], dict[str, Any]] | None = None,
) -> Recorded:
    """Record one reading (see `readings.record_reading_once` for the arguments)."""
    with transaction.atomic(), connection.cursor() as cursor:
        found = _lock(cursor, lot_code, step_id, claim)
        if found is None:
            return _not_found(lot_code, step_id, claim)
        step, lot, free = found
        if not free:
            raise Conflict(STILL_RUNNING)
        facts = _read(cursor, person, step, lot, data, claim)
        if facts.stored is not None:
            return _replay(facts.stored, claim)
        if check_access is not None:
            check_access(step)
        check_assigned(person, step.work_center_id, known=facts.assigned)
        require_workable(step, lot, held_step_readings=True, held_here=facts.held_here)
        if step.status != LotStep.Status.IN_PROGRESS:
            raise Conflict(f"Start '{step.name}' before recording readings.")
        group, value, captured, confirmation = readings.parse_reading(step, data)
        gauge = None
        if data.equipment_id is not None:
            gauge = check_equipment(facts.gauge, data.equipment_id, step.work_center_id)
        readings.refuse_taken_sample(data, facts.current)
        prepared = readings.prepare_reading(
            step=step,
            lot=lot,
            person=person,
            data=data,
            group=group,
            value=value,
            captured=captured,
            equipment=gauge,
            via=via,
            confirmation=confirmation,
            current=facts.current,
            reading_id=facts.reading_id,
        )
        reading = prepared.reading
        body = reply(reading) if reply is not None else {}
        event = OutboxEvent(pk=facts.event_id, kind="reading.recorded", payload=prepared.payload)
        entry = audit.new_entry(
            person.user, "reading.recorded", "reading", reading.pk, after=prepared.audit_after
        )
        stored = None
        if claim is not None:
            stored = IdempotencyRecord(
                user_id=claim.user_id,
                key=claim.key,
                fingerprint=claim.fingerprint,
                completed=True,
                status_code=201,
                body=body,
            )
        _write(cursor, reading, entry, event, stored)
        audit.appended()
        outbox.enqueue(event)
    return Recorded(reading, Outcome(201, body, False))


def _lock(
    cursor: Any, lot_code: str | None, step_id: int | None, claim: Claim | None
) -> tuple[LotStep, Lot, bool] | None:
    params: list[Any] = list(CLOSED)
    claim_sql = "TRUE"
    if claim is not None:
        claim_sql = "(SELECT pg_try_advisory_xact_lock(%s))"
        params.append(claim.lock_id)
    if step_id is not None and lot_code is not None:
        where, params = _BY_ID_AND_CODE, [*params, step_id, lot_code.strip()]
    elif step_id is not None:
        where, params = _BY_ID, [*params, step_id]
    else:
        where, params = _BY_CODE, [*params, (lot_code or "").strip(), *CLOSED]
    cursor.execute(_LOCK.format(claim=claim_sql, where=where), params)
    row = cursor.fetchone()
    if row is None:
        return None
    n_step, n_lot = len(_STEP_FIELDS), len(_LOT_FIELDS)
    step = _instance(LotStep, _STEP_FIELDS, row[:n_step])
    lot = _instance(Lot, _LOT_FIELDS, row[n_step : n_step + n_lot])
    step.lot = lot
    step.earlier_step_open = row[n_step + n_lot]  # type: ignore[attr-defined]
    return step, lot, bool(row[n_step + n_lot + 1])


def _read(
    cursor: Any,
    person: Person,
    step: LotStep,
    lot: Lot,
    data: readings.ReadingInput,
    claim: Claim | None,
) -> Facts:
    params: list[Any] = []
    stored_sql = "NULL"
    if claim is not None:
        stored_sql = _STORED
        params += [claim.user_id, claim.key]
    params += [
        person.pk,
        step.work_center_id,
        person.user_id,
        list(ANYWHERE_ROLES),
        lot.pk,
        step.pk,
        step.pk,
        data.quantity,
        _needs_whole_set(step, lot, data),
        data.sample_index,
        data.equipment_id,
    ]
    cursor.execute(_READ.format(stored=stored_sql), params)
    row = cursor.fetchone()
    stored, assigned, held_here, current, reading_id, event_id = row[:6]
    gauge_row = row[6:]
    gauge = None if gauge_row[0] is None else _instance(Equipment, _GAUGE_FIELDS, gauge_row)
    if isinstance(stored, str):
        stored = json.loads(stored)
    if isinstance(current, str):
        current = json.loads(current)
    return Facts(
        stored=stored,
        assigned=bool(assigned),
        held_here=bool(held_here),
        current={int(i): (int(pk), float(v)) for i, pk, v in current or []},
        reading_id=int(reading_id),
        event_id=int(event_id),
        gauge=gauge,
    )


def _needs_whole_set(step: LotStep, lot: Lot, data: readings.ReadingInput) -> bool:
    """Whether the quantity's whole current set must be read (a set criterion to judge,
    or a held lot whose event lists the set so far); otherwise only this sample's row,
    for the duplicate-sample check (a plan may take a thousand samples)."""
    if lot.on_hold:
        return True
    try:
        return bool(readings.quantity_plan(step, data.quantity).set_entries)
    except DomainError:
        return True  # refused later, after the checks that come first


def _replay(stored: list[Any], claim: Claim | None) -> Recorded:
    fingerprint, status, body = stored
    if claim is None or fingerprint != claim.fingerprint:
        raise IdempotencyMismatch(KEY_REUSED)
    if isinstance(body, str):
        body = json.loads(body)
    return Recorded(None, Outcome(status or 200, body or {}, True))


def _not_found(lot_code: str | None, step_id: int | None, claim: Claim | None) -> Recorded:
    """No such step (or no open step of the lot): a repeat of a request that was recorded
    before the lot moved on still gets its reply; otherwise the refusal says what is wrong
    (extra statements, on this path only)."""
    if claim is not None:
        stored = (
            IdempotencyRecord.objects.filter(user_id=claim.user_id, key=claim.key)
            .values_list("fingerprint", "status_code", "body")
            .first()
        )
        if stored is not None:
            return _replay(list(stored), claim)
    readings.resolve_step(lot_code, step_id)  # raises NotFound or Conflict
    raise NotFound(f"No lot step {step_id}.")  # resolved after all: it vanished meanwhile


def _insert(obj: models.Model) -> tuple[str, list[Any]]:
    """INSERT of one instance with explicit values for every concrete column (the id too,
    when it was taken from the sequence)."""
    meta = obj._meta
    fields = [f for f in meta.concrete_fields if not (f.primary_key and obj.pk is None)]
    columns = ", ".join(f'"{f.column}"' for f in fields)
    values = [f.get_db_prep_save(f.pre_save(obj, True), connection) for f in fields]
    marks = ", ".join(["%s"] * len(fields))
    return f'INSERT INTO "{meta.db_table}" ({columns}) VALUES ({marks})', values


def _write(
    cursor: Any,
    reading: Reading,
    entry: Any,
    event: OutboxEvent,
    stored: IdempotencyRecord | None,
) -> None:
    parts = [_insert(reading), audit.insert_statement([entry]), _insert(event)]
    if stored is not None:
        parts.append(_insert(stored))
    sql = "WITH " + ", ".join(f"w{n} AS ({part})" for n, (part, _) in enumerate(parts))
    params = [p for _, values in parts for p in values]
    cursor.execute(sql + " SELECT 1", params)
    reading._state.adding = False
    reading._state.db = "default"
