"""The alert webhook is signed with HMAC-SHA256 of the exact body (RFC 2104; the digest
is checked here with Python's hmac module, independent of the code under test; HMAC per
RFC 2104 with SHA-256 per FIPS 180-4)."""

from __future__ import annotations

import hashlib
import hmac
import json
import threading
from http.server import BaseHTTPRequestHandler, HTTPServer

import pytest

from shopfloor.quality.models import Alert
from shopfloor.quality.services import alerts, notifications
from tests import helpers

pytestmark = pytest.mark.django_db


@pytest.fixture
def receiver():
    received: list[tuple[dict[str, str], bytes]] = []

    class Handler(BaseHTTPRequestHandler):
        def do_POST(self):
            body = self.rfile.read(int(self.headers["Content-Length"]))
            received.append(({k.lower(): v for k, v in self.headers.items()}, body))
            self.send_response(204)
            self.end_headers()

        def log_message(self, *args):
            pass

    server = HTTPServer(("127.0.0.1", 0), Handler)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.server_port}/hook", received
    server.shutdown()
    server.server_close()


def test_webhook_signed_and_sent_once(floor, settings, receiver):
    url, received = receiver
    settings.ALERT_WEBHOOK_URL = url
    settings.ALERT_WEBHOOK_SECRET = "shared-secret-for-test"
    step = helpers.start_at(floor, floor.lot)
    alerts.handle_event(helpers.event_for(helpers.record(floor, step, "hole_wall_copper", 15.0)).pk)
    alert = Alert.objects.get()

    notifications.notify_alert(alert.pk)
    notifications.notify_alert(alert.pk)

    assert len(received) == 1
    headers, body = received[0]
    expected = hmac.new(b"shared-secret-for-test", body, hashlib.sha256).hexdigest()
    assert headers["x-signature-sha256"] == expected
    assert headers["x-alert-id"] == str(alert.pk)
    payload = json.loads(body)
    assert payload["id"] == alert.pk and payload["lot"] == floor.lot.code
    assert payload["severity"] == "critical"  # 5 um below a 20 um minimum (> 10 %)
