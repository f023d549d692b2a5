"""Queue moves: a supervisor puts the lots waiting at a work center in order.

`reorder_queue` writes LotStep.queue_priority for the lots waiting at a work center, with
an audit entry; `move_in_queue` is the board's one-step form of it (up, down, to the top).
The order itself (`queue_order`) is the board's, so what the board shows and what a move
moves are the same list.
"""

from __future__ import annotations

from django.db import transaction

from shopfloor import access
from shopfloor.audit import services as audit
from shopfloor.errors import InvalidInput, NotAllowed, NotFound
from shopfloor.floor.models import LotStep
from shopfloor.plant.models import Person, WorkCenter
from shopfloor.quality.read.board import queue_order

MOVES = ("up", "down", "top")


def waiting_queue(work_center_id: int) -> list[LotStep]:
    """The lots waiting at a work center, in the order the board shows them."""
    steps = list(
        LotStep.objects.current()
        .filter(work_center_id=work_center_id, status=LotStep.Status.WAITING, lot__on_hold=False)
        .select_related("lot")
    )
    steps.sort(
        key=lambda s: queue_order(
            s.queue_priority, s.lot.priority, s.arrived_at, s.lot.created_at, s.lot.code
        )
    )
    return steps


def _require_reorder(person: Person) -> None:
    if not access.is_supervising(person):
        raise NotAllowed("Only a supervisor or administrator can change the order of a queue.")


@transaction.atomic
def reorder_queue(
    person: Person, work_center_id: int, ordered_lot_step_ids: list[int]
) -> list[LotStep]:
    """Put a work center's waiting lots in the order given (first runs first).

    Lots named come first, in the order named; lots not named keep their order after
    them. Priorities are written as -n..-1, so lots that arrive later (priority 0) queue
    behind the order a supervisor set rather than jumping ahead of it.
    """
    _require_reorder(person)
    center = WorkCenter.objects.filter(pk=work_center_id).first()
    if center is None:
        raise NotFound(f"No work center {work_center_id}.")
    if len(set(ordered_lot_step_ids)) != len(ordered_lot_step_ids):
        raise InvalidInput("A lot appears twice in the new order; name each lot once.")
    # Lock the queue's rows so two supervisors reordering at once apply one after the other.
    list(
        LotStep.objects.select_for_update(no_key=True).filter(
            work_center_id=work_center_id, status=LotStep.Status.WAITING
        )
    )
    queue = waiting_queue(work_center_id)
    by_id = {s.pk: s for s in queue}
    unknown = [i for i in ordered_lot_step_ids if i not in by_id]
    if unknown:
        raise InvalidInput(
            f"Lot step(s) {unknown} are not waiting in the queue at {center.name}; "
            "reload the board and try again.",
            problems=[{"field": "ordered_lot_step_ids", "value": unknown}],
        )
    before = [s.lot.code for s in queue]
    named = [by_id[i] for i in ordered_lot_step_ids]
    rest = [s for s in queue if s.pk not in set(ordered_lot_step_ids)]
    new_order = named + rest
    n = len(new_order)
    for i, step in enumerate(new_order):
        step.queue_priority = i - n
    LotStep.objects.bulk_update(new_order, ["queue_priority"])
    audit.record(
        actor=person.user,
        action="queue.reordered",
        object_type="work_center",
        object_id=center.pk,
        before={"order": before},
        after={"order": [s.lot.code for s in new_order]},
    )
    return new_order


def move_in_queue(
    person: Person, work_center_id: int, lot_step_id: int, move: str
) -> list[LotStep]:
    """Move one lot up, down or to the top of its work center's queue."""
    if move not in MOVES:
        raise InvalidInput(f"Move {move!r} is not known; allowed: {', '.join(MOVES)}.")
    _require_reorder(person)
    ids = [s.pk for s in waiting_queue(work_center_id)]
    if lot_step_id not in ids:
        raise InvalidInput(
            "That lot is not waiting in this queue any more (it may have started or moved "
            "on); reload the board."
        )
    i = ids.index(lot_step_id)
    ids.pop(i)
    target = {"top": 0, "up": max(i - 1, 0), "down": min(i + 1, len(ids))}[move]
    ids.insert(target, lot_step_id)
    return reorder_queue(person, work_center_id, ids)
