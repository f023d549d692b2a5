"""Telling people about an alert: e-mail to the work center's list and a signed webhook.

The in-app notification is the Alert row itself. These channels run after the alert's
transaction has committed, in their own step, so a slow mail server or a dead webhook
receiver can never undo or delay a hold, and can never create a second alert.

Webhook body: JSON (sorted keys, no spaces) describing the alert; header
``X-Signature-SHA256`` is the hex HMAC-SHA256 of exactly those bytes with
``settings.ALERT_WEBHOOK_SECRET``; ``X-Alert-Id`` lets a receiver drop a repeat
(delivery is at least once).
"""

from __future__ import annotations

import hashlib
import hmac
import json
import logging
import urllib.error
import urllib.request
from typing import Any

from django.conf import settings
from django.core.mail import send_mail

from shopfloor.quality.models import Alert

log = logging.getLogger("shopfloor.notify")

WEBHOOK_TIMEOUT_SECONDS = 5


class WebhookFailed(Exception):
    """The receiver could not be reached or did not answer 2xx; retried boundedly."""


def alert_payload(alert: Alert) -> dict[str, Any]:
    return {
        "id": alert.pk,
        "kind": alert.kind,
        "severity": alert.severity,
        "message": alert.message,
        "rule": alert.rule or None,
        "lot": alert.lot.code if alert.lot else None,
        "lot_step": alert.lot_step_id,
        "job": alert.job.number if alert.job else None,
        "work_center": alert.work_center.code if alert.work_center else None,
        "reading": alert.reading_id,
        "created_at": alert.created_at.isoformat(),
    }


def body_bytes(payload: dict[str, Any]) -> bytes:
    return json.dumps(payload, sort_keys=True, separators=(",", ":")).encode()


def signature(body: bytes, secret: str) -> str:
    return hmac.new(secret.encode(), body, hashlib.sha256).hexdigest()


def recipients(alert: Alert) -> list[str]:
    if alert.work_center is None:
        return []
    return alert.work_center.notification_list()


def send_email(alert: Alert) -> int:
    """Mail the alert to the work center's list; returns how many messages went out."""
    to = recipients(alert)
    if not to:
        return 0
    subject = f"[{alert.get_severity_display()}] {alert.get_kind_display()}"
    if alert.lot is not None:
        subject += f" - lot {alert.lot.code}"
    lines = [alert.message, ""]
    if alert.lot is not None:
        lines.append(f"Lot: {alert.lot.code}")
    if alert.work_center is not None:
        lines.append(f"Work center: {alert.work_center.name}")
    lines.append(f"Alert #{alert.pk} raised {alert.created_at:%Y-%m-%d %H:%M} UTC")
    return send_mail(subject[:200], "\n".join(lines), settings.DEFAULT_FROM_EMAIL, to)


def webhook_configured() -> bool:
    return bool(getattr(settings, "ALERT_WEBHOOK_URL", ""))


def post_webhook(alert: Alert) -> None:
    """POST the signed alert; raises WebhookFailed when the receiver did not take it."""
    url = settings.ALERT_WEBHOOK_URL
    if not url.startswith(("http://", "https://")):
        raise WebhookFailed(f"ALERT_WEBHOOK_URL {url!r} is not an http(s) URL")
    body = body_bytes(alert_payload(alert))
    headers = {"Content-Type": "application/json", "X-Alert-Id": str(alert.pk)}
    secret = getattr(settings, "ALERT_WEBHOOK_SECRET", "")
    if secret:
        headers["X-Signature-SHA256"] = signature(body, secret)
    request = urllib.request.Request(url, data=body, headers=headers, method="POST")  # noqa: S310
    try:
        with urllib.request.urlopen(request, timeout=WEBHOOK_TIMEOUT_SECONDS) as reply:  # noqa: S310
            status = reply.status
    except urllib.error.HTTPError as exc:
        raise WebhookFailed(f"webhook answered {exc.code}") from exc
    except (urllib.error.URLError, OSError) as exc:
        raise WebhookFailed(f"webhook unreachable: {exc}") from exc
    if not 200 <= status < 300:
        raise WebhookFailed(f"webhook answered {status}")
