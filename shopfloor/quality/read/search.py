"""Search for lots by job, part, lot, customer, material, equipment and dates, and the
quality overview (open holds, NCRs and alerts), each through the reader's scope."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from django.db.models import Q, QuerySet

from shopfloor import parsing
from shopfloor.access import Scope, visible_lots
from shopfloor.errors import InvalidInput
from shopfloor.plant.models import Equipment, Lot
from shopfloor.quality.models import Alert, Hold, Nonconformance
from shopfloor.quality.read.history import MAX_RANGE_DAYS, SEARCH_LIMIT

# --- search -------------------------------------------------------------------------

SEARCH_FIELDS = ("job", "part", "lot", "customer", "material", "equipment", "date_from", "date_to")


@dataclass
class SearchResult:
    lots: list[Lot]
    message: str
    criteria: dict[str, str]
    truncated: bool = False


def search(scope: Scope, params: Any) -> SearchResult:
    """Lots matching every criterion given (job, part, lot, customer, dates, material,
    equipment); a clear message for no criteria, no hits or a bad date range."""
    crit = {k: (params.get(k, "") or "").strip()[:60] for k in SEARCH_FIELDS}
    if not any(crit.values()):
        return SearchResult([], "Enter at least one thing to search by.", crit)
    date_from = parsing.iso_date("From date", crit["date_from"])
    date_to = parsing.iso_date("To date", crit["date_to"])
    if date_from and date_to:
        if date_to < date_from:
            raise InvalidInput(
                "The date range ends before it starts: the 'to' date "
                "must be on or after the 'from' date."
            )
        if (date_to - date_from).days > MAX_RANGE_DAYS:
            raise InvalidInput(
                f"The date range is wider than {MAX_RANGE_DAYS} days; "
                "narrow it (or search by job, lot or material instead)."
            )
    qs: QuerySet[Lot] = visible_lots(scope)
    if crit["lot"]:
        qs = qs.filter(code__icontains=crit["lot"])
    if crit["job"]:
        qs = qs.filter(panels__images__job__number__icontains=crit["job"])
    if crit["part"]:
        qs = qs.filter(panels__images__job__part_revision__part__number__icontains=crit["part"])
    if crit["customer"]:
        c = crit["customer"]
        qs = qs.filter(
            Q(panels__images__job__part_revision__part__customer__code__iexact=c)
            | Q(panels__images__job__part_revision__part__customer__name__icontains=c)
        )
    if crit["material"]:
        qs = qs.filter(steps__material_lots__code__iexact=crit["material"])
    if crit["equipment"]:
        eq = Equipment.objects.filter(code__iexact=crit["equipment"]).first()
        if eq is None:
            return SearchResult([], f"No equipment with code {crit['equipment']!r}.", crit)
        qs = qs.filter(Q(steps__equipment=eq) | Q(steps__readings__equipment=eq))
    if date_from:
        qs = qs.filter(created_at__date__gte=date_from)
    if date_to:
        qs = qs.filter(created_at__date__lte=date_to)
    lots = list(
        qs.distinct().select_related("routing_revision").order_by("-created_at")[: SEARCH_LIMIT + 1]
    )
    truncated = len(lots) > SEARCH_LIMIT
    lots = lots[:SEARCH_LIMIT]
    if not lots:
        return SearchResult([], "No lots match this search.", crit)
    msg = (
        f"{len(lots)} lot(s) found"
        + (f" (showing the newest {SEARCH_LIMIT})" if truncated else "")
        + "."
    )
    return SearchResult(lots, msg, crit, truncated)


@dataclass
class QualityOverview:
    holds: list[Hold]
    ncrs: list[Nonconformance]
    alerts: list[Alert]


def overview(scope: Scope) -> QualityOverview:
    """Open holds, open NCRs and open alerts the reader may see."""
    lots = visible_lots(scope)
    return QualityOverview(
        holds=list(
            Hold.objects.filter(released_at__isnull=True, lot__in=lots)
            .select_related("lot", "ncr")
            .order_by("opened_at")[:500]
        ),
        ncrs=list(
            Nonconformance.objects.filter(status=Nonconformance.Status.OPEN, lot__in=lots)
            .select_related("lot")
            .order_by("opened_at")[:500]
        ),
        alerts=list(
            Alert.objects.filter(closed_at__isnull=True)
            .filter(Q(lot__in=lots) | Q(lot__isnull=True) if scope.sees_all else Q(lot__in=lots))
            .select_related("lot", "work_center")
            .order_by("-created_at")[:500]
        ),
    )
