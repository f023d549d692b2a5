"""Due-date and queue-time arithmetic (pure; no Django imports).

Remaining work is the sum of the standard minutes of the steps not yet done. A job is
late when its due time has passed; at risk when its forecast P90 finish is after the due
time (`forecast_due_state`) or, while no forecast exists, when the remaining standard
time stretched by a planning factor for queueing between steps no longer fits in the
time left (`due_state`, the fallback).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from enum import StrEnum


class DueState(StrEnum):
    LATE = "late"
    AT_RISK = "at_risk"
    ON_TIME = "on_time"


# Lots spend more time queued than being worked; 3x is a planning assumption the shop
# tunes (common practice is to plan with a queue allowance on top of run time).
DEFAULT_FLOW_FACTOR = 3.0


def due_state(
    now: datetime, due: datetime, remaining_minutes: float, flow_factor: float = DEFAULT_FLOW_FACTOR
) -> DueState:
    if now >= due:
        return DueState.LATE
    needed = timedelta(minutes=remaining_minutes * flow_factor)
    return DueState.AT_RISK if now + needed > due else DueState.ON_TIME


def forecast_due_state(now: datetime, due: datetime, p90: datetime) -> DueState:
    """Due-date state from a finish forecast: at risk when the 90th-percentile finish
    (nine in ten simulated futures finish by then) is after the due time. Replaces the
    flow factor wherever a forecast exists (shopfloor/core/planning)."""
    if now >= due:
        return DueState.LATE
    return DueState.AT_RISK if p90 > due else DueState.ON_TIME


@dataclass(frozen=True)
class QueueState:
    minutes_waited: float
    limit_minutes: int
    warn: bool
    exceeded: bool


# Warn when 80 % of a queue-time limit has passed (shop practice; editable per site).
QUEUE_WARN_FRACTION = 0.8


def queue_state(
    arrived: datetime, now: datetime, limit_minutes: int, warn_fraction: float = QUEUE_WARN_FRACTION
) -> QueueState:
    waited = (now - arrived).total_seconds() / 60.0
    return QueueState(
        minutes_waited=waited,
        limit_minutes=limit_minutes,
        warn=waited >= limit_minutes * warn_fraction,
        exceeded=waited > limit_minutes,
    )
