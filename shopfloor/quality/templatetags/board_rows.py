"""`{% lot_rows column %}`: the supervisor board's lot rows, written out in Python.

The wall screen shows up to OVERVIEW_ROWS_PER_CENTER rows for each work center (about
270 on a busy floor). As template markup each row cost some 30 variable lookups, filters
and escapes: about 22 ms of an 80 ms board at 2,000 lots; written out here they take
about 2 ms (bench/bench_board.py). The markup is what board.html had, and the rest of
the page stays in the template. Every value goes through `_e` (HTML escape, quotes
too); tests/board/test_board.py checks that with markup in a lot code and a hold reason.
"""

from __future__ import annotations

from html import escape
from typing import Any

from django import template
from django.utils.safestring import SafeString, mark_safe

from shopfloor.quality.read.board import BoardColumn, BoardLot

register = template.Library()


def _e(value: object) -> str:
    return escape(str(value), quote=True)


def _csrf_input(context: Any) -> str:
    """What {% csrf_token %} writes (nothing when the page was rendered without one)."""
    token = context.get("csrf_token")
    if not token or str(token) == "NOTPROVIDED":
        return ""
    return f'<input type="hidden" name="csrfmiddlewaretoken" value="{_e(token)}">'


def _row(lot: BoardLot, may_reorder: bool, form_id: str, back: str, csrf: str) -> str:
    code = _e(lot.lot_code)
    finish = f'<div class="muted">{_e(lot.finish)}</div>' if lot.finish else ""
    jobs = "<br>".join(
        f'<a href="{_e(j.url)}">{_e(j.number)}</a> <span class="muted">{_e(j.detail)}</span>'
        for j in lot.job_list
    )
    state = f"<strong>{_e(lot.state_word)}</strong>"
    if lot.hold_reason:
        state += f'<div class="muted">{_e(lot.hold_summary)}</div>'
    for word in lot.alert_words:
        state += f'<div class="alert-word">ALERT: {_e(word)}</div>'
    queue = ""
    if lot.queue is not None:
        word = lot.queue_word
        warn = ' class="warn"' if word else ""
        queue = f"<strong{warn}>{_e(word)}</strong> <span>{_e(lot.queue_text)}</span>"
        if may_reorder and lot.releasable:
            queue += (
                '<details class="release"><summary>Release…</summary>'
                f'<form method="post" action="{_e(lot.release_url)}">{csrf}'
                f'<input type="hidden" name="back" value="{back}">'
                '<label>Reason <input name="reason" required minlength="3"></label>'
                ' <button class="btn small" type="submit">Release warning</button>'
                "</form></details>"
            )
    due = f"<strong>{_e(lot.due_word)}</strong>"
    if lot.job_list:
        due += f'<div class="muted">{_e(lot.due_detail)}</div>'
    finish_cell = projected_finish(lot)
    order = ""
    if may_reorder:
        buttons = ""
        if lot.state == "queued":
            step = _e(lot.step_id)
            buttons = " ".join(
                f'<button class="btn small" form="{form_id}" name="move" value="{move}:{step}"'
                f' title="Move {code} {where}">{label}</button>'
                for move, where, label in _MOVES
            )
        order = f'<td class="order">{buttons}</td>'
    return (
        f'<tr class="lot state-{_e(lot.state)} due-{_e(lot.due_state)}" data-lot="{code}">'
        f'<td class="lot-code"><a href="{_e(lot.lot_url)}">{code}</a>{finish}</td>'
        f"<td>{jobs}</td>"
        f"<td>{_e(lot.step_name)}</td>"
        f'<td class="state">{state}</td>'
        f"<td>{_e(lot.at_step_text)}</td>"
        f"<td>{_e(lot.wip_text)}</td>"
        f'<td class="queue-time">{queue}</td>'
        f'<td class="due">{due}</td>'
        f'<td class="forecast">{finish_cell}</td>'
        f"{order}</tr>\n"
    )


def projected_finish(lot: BoardLot) -> str:
    """The projected-finish cell: the lot's P50 and P90 from the planning forecast, one
    per line, or a muted 'no forecast' while there is no fresh run."""
    if not lot.forecast_text:
        return '<span class="muted">no forecast</span>'
    p50, _, p90 = lot.forecast_text.partition(" · ")
    return f"<span>{_e(p50)}</span><br><span>{_e(p90)}</span>"


_MOVES = (("top", "to the top", "Top"), ("up", "up", "Up"), ("down", "down", "Down"))


@register.simple_tag(takes_context=True)
def lot_rows(context: Any, column: BoardColumn) -> SafeString:
    """The <tr> of each lot the column shows (column.rows). Reads `may_reorder` (show the
    order buttons and the queue-time release), `query` (the filters, sent back with a
    form) and the CSRF token from the template context."""
    may_reorder = bool(context.get("may_reorder"))
    back = _e(context.get("query", ""))
    csrf = _csrf_input(context) if may_reorder else ""
    form_id = _e(column.form_id)
    html = "".join(_row(lot, may_reorder, form_id, back, csrf) for lot in column.rows)
    return mark_safe(html)  # noqa: S308 - every value above is escaped by _e
