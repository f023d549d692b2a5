"""Delivery: an alert's e-mail and webhook, sent once, and the relay that re-sends what
the broker lost.

An alert is notified after the transaction that made it commits, as its own idempotent
step (`Alert.notified_at`, the row locked while sending), so a failing channel can neither
undo the hold nor send twice. `relay_outbox` (on the beat) publishes outbox events the
broker never got and re-queues notifications that never ran.
"""

from __future__ import annotations

import logging
from datetime import datetime, timedelta

from django.conf import settings
from django.db import transaction
from django.db.models import Q
from django.utils import timezone

from shopfloor.quality import notify, outbox
from shopfloor.quality.models import Alert, OutboxEvent

log = logging.getLogger("shopfloor.quality")

# An event whose processing failed this many times is left for a person (last_error says
# why) instead of being retried for ever.
MAX_EVENT_ATTEMPTS = 10
RELAY_BATCH = 200
# Published but still unprocessed after this long: publish again (the claim makes a
# duplicate delivery harmless).
REPUBLISH_AFTER = timedelta(seconds=getattr(settings, "OUTBOX_REPUBLISH_AFTER_SECONDS", 120))
# Alerts whose notification never ran (lost message) are re-queued after this long,
# but only for a day: an old alert is seen in the app, a late e-mail helps nobody.
RENOTIFY_AFTER = timedelta(seconds=60)
RENOTIFY_HORIZON = timedelta(days=1)

# --- relay --------------------------------------------------------------------------


def relay_outbox(now: datetime | None = None, batch: int = RELAY_BATCH) -> dict[str, int]:
    """Publish events the broker never got (or lost), and re-queue lost notifications.

    A request's first publish writes nothing, so an unprocessed event with no
    `published_at` may be queued or lost: the relay sends it (a queued one is then
    processed once, the second message finds it claimed) and stamps it, so it is sent
    again only after REPUBLISH_AFTER.
    """
    now = now or timezone.now()
    ids = list(
        OutboxEvent.objects.filter(processed_at__isnull=True, attempts__lt=MAX_EVENT_ATTEMPTS)
        .filter(Q(published_at__isnull=True) | Q(published_at__lt=now - REPUBLISH_AFTER))
        .order_by("pk")
        .values_list("pk", flat=True)[:batch]
    )
    published = 0
    for event_id in ids:
        if not outbox.publish(event_id, republish=True):
            break  # broker still down: try again on the next beat
        published += 1
    stuck = OutboxEvent.objects.filter(
        processed_at__isnull=True, attempts__gte=MAX_EVENT_ATTEMPTS
    ).count()
    if stuck:
        log.error(
            "%s outbox event(s) failed %s times and need a person; see last_error",
            stuck,
            MAX_EVENT_ATTEMPTS,
        )
    renotified = 0
    alert_ids = list(
        Alert.objects.filter(
            notified_at__isnull=True,
            created_at__lt=now - RENOTIFY_AFTER,
            created_at__gte=now - RENOTIFY_HORIZON,
        )
        .order_by("pk")
        .values_list("pk", flat=True)[:batch]
    )
    for alert_id in alert_ids:
        try:
            outbox.queue_task(
                outbox.NOTIFY_ALERT, args=[alert_id], retry_policy=outbox.RETRY_POLICY
            )
        except Exception as exc:
            log.warning("relay could not queue notification of alert %s: %s", alert_id, exc)
            break
        renotified += 1
    return {
        "candidates": len(ids),
        "published": published,
        "renotified": renotified,
        "stuck": stuck,
    }


# --- notifications ------------------------------------------------------------------


def notify_alert(alert_id: int) -> bool:
    """Send an alert's e-mail and webhook once; True when this call did it.

    The alert row stays locked while sending, so two workers cannot both send; if the
    worker dies mid-send the transaction rolls back and the task is delivered again.
    A failing webhook is handed to a bounded retry task and never blocks anything.
    """

    with transaction.atomic():
        alert = (
            Alert.objects.select_for_update(of=("self",))
            .select_related("lot", "work_center", "job")
            .filter(pk=alert_id, notified_at__isnull=True)
            .first()
        )
        if alert is None:
            return False
        sent = notify.send_email(alert)
        webhook_ok = True
        if notify.webhook_configured():
            try:
                notify.post_webhook(alert)
            except notify.WebhookFailed as exc:
                log.warning("webhook for alert %s failed, will retry: %s", alert.pk, exc)
                webhook_ok = False
        alert.notified_at = timezone.now()
        alert.save(update_fields=["notified_at"])
        log.info(
            "alert %s notified (%s e-mail(s), webhook %s)",
            alert.pk,
            sent,
            ("ok" if webhook_ok else "retrying") if notify.webhook_configured() else "off",
        )
        if not webhook_ok:

            def retry() -> None:
                try:
                    outbox.queue_task(
                        outbox.DELIVER_WEBHOOK,
                        args=[alert_id],
                        countdown=2,
                        retry_policy=outbox.RETRY_POLICY,
                    )
                except Exception as exc:
                    log.warning("could not queue webhook retry for alert %s: %s", alert_id, exc)

            transaction.on_commit(retry)
    return True


def deliver_webhook(alert_id: int) -> None:
    """One more webhook attempt (raises notify.WebhookFailed so the task retries)."""

    alert = Alert.objects.select_related("lot", "work_center", "job").filter(pk=alert_id).first()
    if alert is None or not notify.webhook_configured():
        return
    notify.post_webhook(alert)
