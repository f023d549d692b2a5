"""The tablet pages through the Django test client: each page, each refusal, nothing saved.

Outside facts used: 1 mil = 0.001 inch and 1 inch = 25.4 mm exactly (the 1959
international yard and pound agreement), so 1.6 mil = 40.64 µm; tolerance limits are
inclusive (common practice when reading a min/max requirement); QR codes follow
ISO/IEC 18004 and are decoded here by an independent decoder (zbar); the PDF text is
extracted by an independent tool (poppler's pdftotext).
"""

from __future__ import annotations

import datetime as dt
import shutil
import subprocess

import pytest
from django.contrib.auth.models import User
from django.test import Client
from django.utils import timezone

from shopfloor.audit.models import Signature
from shopfloor.context import SAFETY_CAUTION
from shopfloor.core.judging import describe_window
from shopfloor.floor import traveller
from shopfloor.floor.models import IdempotencyRecord, LotStep, Reading
from shopfloor.plant.models import Equipment, Person, WorkCenter
from shopfloor.quality.models import Hold
from tests import factories, helpers
from tests.factories import PIN

pytestmark = pytest.mark.django_db


def htmx_post(client: Client, url: str, data: dict, **extra):
    return client.post(url, data, HTTP_HX_REQUEST="true", **extra)


def reading_url(step: LotStep) -> str:
    return f"/floor/steps/{step.pk}/readings/"


def text(response) -> str:
    return response.content.decode()


@pytest.fixture
def op_client(client, operator):
    client.force_login(operator.user)
    return client


@pytest.fixture
def started(op_client, measured_step):
    r = op_client.post(f"/floor/steps/{measured_step.pk}/start/", {"idempotency_key": "s-1"})
    assert r.status_code == 302
    measured_step.refresh_from_db()
    return measured_step


def plan_item(step: LotStep, quantity: str) -> dict:
    return next(m for m in step.plan if m["quantity"] == quantity)


# --- login ----------------------------------------------------------------------------


def test_login_page_and_badge_login(client, floor):
    assert client.get("/floor/login/").status_code == 200
    r = client.post("/floor/login/", {"badge": "1001", "pin": PIN})
    assert r.status_code == 302 and r["Location"] == "/floor/"


def test_login_wrong_pin_is_counted_but_does_not_reveal_the_badge(client, floor):
    r = client.post("/floor/login/", {"badge": "1001", "pin": "0000"})
    assert r.status_code == 400
    # same words as an unknown badge (no badge enumeration at the login screen) ...
    assert "Badge number or PIN is not right." in text(r)
    assert "_auth_user_id" not in client.session
    # ... but the failure counts toward the lockout
    assert Person.objects.get(badge_number="1001").pin_failures == 1


def test_login_locked_badge_refused_even_with_right_pin(client, floor):
    Person.objects.filter(badge_number="1001").update(locked_at=timezone.now())
    r = client.post("/floor/login/", {"badge": "1001", "pin": PIN})
    assert r.status_code == 400
    assert "locked" in text(r)
    assert "_auth_user_id" not in client.session


def test_login_next_only_follows_local_paths(client, floor):
    r = client.post("/floor/login/?next=https://elsewhere.example/", {"badge": "1001", "pin": PIN})
    assert r["Location"] == "/floor/"


def test_pages_need_login(client, floor):
    r = client.get(f"/floor/lots/{floor.lot.code}/")
    assert r.status_code == 302 and r["Location"].startswith("/floor/login/")


# --- work centers and queue -----------------------------------------------------------


def test_work_center_tiles_only_linked(client, floor):
    centers = list(WorkCenter.objects.order_by("code"))
    person = factories.make_person("operator", work_centers=[centers[0]])
    client.force_login(person.user)
    r = client.get("/floor/")
    assert r.status_code == 200
    assert f"/floor/centers/{centers[0].code}/" in text(r)
    assert f"/floor/centers/{centers[1].code}/" not in text(r)


def test_queue_of_unlinked_work_center_is_403_with_reason(client, floor):
    centers = list(WorkCenter.objects.order_by("code"))
    person = factories.make_person("operator", work_centers=[centers[0]])
    client.force_login(person.user)
    r = client.get(f"/floor/centers/{centers[1].code}/")
    assert r.status_code == 403
    assert "is not linked to" in text(r)


def test_account_without_badge_gets_403_page(client, floor):
    user = User.objects.create_user("nobadge", password="x-long-password-1")
    client.force_login(user)
    r = client.get("/floor/")
    assert r.status_code == 403
    assert "no badge on file" in text(r)


def test_queue_order_and_columns(op_client, floor):
    first = floor.lot.steps.order_by("position").first()
    wc = first.work_center
    other = factories.make_lot(floor.routing, floor.job, code="LQ-B")
    third = factories.make_lot(floor.routing, floor.job, code="LQ-C")
    # Supervisor order beats lot priority; lot priority beats arrival.
    LotStep.objects.filter(lot=third, position=first.position).update(queue_priority=-5)
    other.priority = 10
    other.save()
    Hold.objects.create(lot=floor.lot, reason="test hold")
    floor.lot.on_hold = True
    floor.lot.save()
    r = op_client.get(f"/floor/centers/{wc.code}/")
    body = text(r)
    assert r.status_code == 200
    assert body.index("LQ-C") < body.index("LQ-B") < body.index(floor.lot.code)
    assert "ON HOLD" in body
    assert floor.job.number in body
    assert f"due {floor.job.due_date:%Y-%m-%d}" in body
    assert "IPC class 2" in body


def test_queue_lists_only_lots_whose_current_step_is_here(op_client, floor):
    step = helpers.advance_to(floor.lot, helpers.measured(attribute=True))
    earlier = floor.lot.steps.order_by("position").first().work_center
    if earlier.pk != step.work_center_id:
        assert floor.lot.code not in text(op_client.get(f"/floor/centers/{earlier.code}/"))
    assert floor.lot.code in text(op_client.get(f"/floor/centers/{step.work_center.code}/"))


# --- scan and the lot page ------------------------------------------------------------


def test_scan_opens_lot_case_insensitive(op_client, floor):
    r = op_client.get("/floor/scan/", {"code": f"  {floor.lot.code.lower()} "})
    assert r.status_code == 302 and r["Location"] == f"/floor/lots/{floor.lot.code}/"


def test_scan_unknown_code_inline_404(op_client, floor):
    r = op_client.get("/floor/scan/", {"code": "NOPE-1"})
    assert r.status_code == 404
    assert "No lot with code &#x27;NOPE-1&#x27;" in text(r)
    r = op_client.get("/floor/scan/", {"code": ""})
    assert r.status_code == 400


def test_unknown_lot_page_inline_404(op_client, floor):
    r = op_client.get("/floor/lots/NOPE-2/")
    assert r.status_code == 404
    assert "No lot with code" in text(r)


def test_lot_page_shows_hazard_caution_and_qr(op_client, floor):
    step = floor.lot.steps.exclude(hazard="").order_by("position").first()
    LotStep.objects.filter(lot=floor.lot, position__lt=step.position).update(
        status=LotStep.Status.DONE
    )
    body = text(op_client.get(f"/floor/lots/{floor.lot.code}/"))
    assert "Caution — hazardous step" in body
    assert step.hazard.split(".")[0] in body.replace("&#x27;", "'")
    assert SAFETY_CAUTION.split(".")[0] in body
    assert "<svg" in body
    assert floor.routing.part_revision.part.number in body


def test_lot_page_shows_each_window_with_its_source(op_client, floor, measured_step, gauge_at):
    gauge_at(measured_step.work_center, due_in_days=30, code="GA-OK")
    body = text(op_client.get(f"/floor/lots/{floor.lot.code}/"))
    for m in measured_step.plan:
        assert describe_window(m) in body
        assert m["source"].split("(")[0].strip()[:40].replace("'", "&#x27;") in body
    assert "GA-OK" in body and "cal. due" in body
    assert '<option value="mil">' in body  # the trade's other units are offered


# --- start / readings -----------------------------------------------------------------


def test_start_refused_when_not_qualified(client, floor, measured_step):
    person = factories.make_person("operator")
    person.work_centers.add(measured_step.work_center)
    client.force_login(person.user)
    r = client.post(f"/floor/steps/{measured_step.pk}/start/", {"idempotency_key": "nq"})
    assert r.status_code == 403
    assert "is not qualified for this work center" in text(r)
    measured_step.refresh_from_db()
    assert measured_step.status == LotStep.Status.WAITING
    assert not IdempotencyRecord.objects.filter(key="nq").exists()


def test_held_lot_banner_and_refusal(op_client, floor, measured_step):
    floor.lot.on_hold = True
    floor.lot.save()
    Hold.objects.create(lot=floor.lot, reason="surface copper low on sample 2")
    page = text(op_client.get(f"/floor/lots/{floor.lot.code}/"))
    assert "ON HOLD" in page and "surface copper low on sample 2" in page
    r = op_client.post(f"/floor/steps/{measured_step.pk}/start/", {})
    assert r.status_code == 409
    assert f"Lot {floor.lot.code} is on hold" in text(r)
    measured_step.refresh_from_db()
    assert measured_step.status == LotStep.Status.WAITING


def test_not_current_step_refused(op_client, floor, measured_step):
    later = floor.lot.steps.filter(position__gt=measured_step.position).first()
    r = op_client.post(f"/floor/steps/{later.pk}/start/", {})
    assert r.status_code == 409
    assert "is not the lot&#x27;s current step" in text(r)


def test_unknown_step_inline_404(op_client, floor):
    r = op_client.post("/floor/steps/999999/start/", {})
    assert r.status_code == 404
    assert "No lot step 999999" in text(r)


def test_in_and_out_of_window_feedback(op_client, started):
    m = plan_item(started, "surface_copper")
    r = htmx_post(
        op_client,
        reading_url(started),
        {
            "quantity": m["quantity"],
            "sample_index": 1,
            "value": str(m["min"]),
            "unit": "um",
            "idempotency_key": "r-in",
        },
    )
    # On the lower limit exactly: inside (limits are inclusive, common practice).
    assert r.status_code == 201
    assert "✓ In window" in text(r) and 'class="sample-row ok"' in text(r)
    r = htmx_post(
        op_client,
        reading_url(started),
        {
            "quantity": m["quantity"],
            "sample_index": 2,
            "value": str(m["min"] - 0.01),
            "unit": "um",
            "idempotency_key": "r-out",
        },
    )
    # Out of window: the typo guard asks first and stores nothing (409 with Confirm).
    assert r.status_code == 409
    assert "Check this value:" in text(r) and 'name="confirm_out_of_window"' in text(r)
    assert Reading.objects.filter(lot_step=started).count() == 1
    r = htmx_post(
        op_client,
        reading_url(started),
        {
            "quantity": m["quantity"],
            "sample_index": 2,
            "value": str(m["min"] - 0.01),
            "unit": "um",
            "idempotency_key": "r-out",
            "confirm_out_of_window": "1",
        },
    )
    assert r.status_code == 201
    body = text(r)
    assert "Confirmed as entered:" in body
    assert "OUT OF WINDOW" in body and "Quality will be alerted; the lot will be held." in body
    assert 'class="sample-row bad"' in body
    assert Reading.objects.filter(lot_step=started).count() == 2


def test_reading_in_mil_is_converted(op_client, started):
    # 1.6 mil = 1.6 × 25.4 µm = 40.64 µm (1 in = 25.4 mm exactly, 1959 agreement).
    r = htmx_post(
        op_client,
        reading_url(started),
        {
            "quantity": "surface_copper",
            "sample_index": 3,
            "value": "1.6",
            "unit": "mil",
            "idempotency_key": "r-mil",
        },
    )
    assert r.status_code == 201
    reading = Reading.objects.get(lot_step=started, sample_index=3, quantity="surface_copper")
    assert reading.value == pytest.approx(40.64)
    assert reading.unit == "um" and reading.entered_unit == "mil"


@pytest.mark.parametrize(
    ("data", "status", "message"),
    [
        ({"value": "12,5", "unit": "um"}, 400, "use a point as the decimal separator"),
        ({"value": "20", "unit": "kg"}, 400, "unknown unit"),
        ({"value": "20", "unit": "%"}, 400, "does not measure this quantity"),
        ({"value": "", "unit": "um"}, 400, "Value"),
        ({"value": "20", "unit": "um", "sample_index": 9}, 400, "outside the plan"),
        (
            {"value": "20", "unit": "um", "captured_at": "2030-01-01T10:00:00"},
            400,
            "offset from UTC",
        ),
        ({"value": "20", "unit": "um", "captured_at": "yesterday"}, 400, "ISO 8601"),
    ],
)
def test_bad_reading_input_refused_nothing_saved(op_client, started, data, status, message):
    payload = {"quantity": "surface_copper", "sample_index": 1, **data}
    r = htmx_post(op_client, reading_url(started), payload)
    assert r.status_code == status
    assert message in text(r).replace("&#x27;", "'")
    assert not Reading.objects.filter(lot_step=started).exists()


def test_unknown_quantity_refused(op_client, started):
    r = htmx_post(
        op_client,
        reading_url(started),
        {"quantity": "gold_thickness", "sample_index": 1, "value": "1", "unit": "um"},
    )
    assert r.status_code == 400
    assert "is not measured at" in text(r)
    assert not Reading.objects.filter(lot_step=started).exists()


def test_expired_gauge_refused(op_client, started, gauge_at):
    gauge = gauge_at(started.work_center, due_in_days=-1, code="GA-OLD")
    page = text(op_client.get(f"/floor/lots/{started.lot.code}/"))
    assert "CAL. EXPIRED" in page
    r = htmx_post(
        op_client,
        reading_url(started),
        {
            "quantity": "surface_copper",
            "sample_index": 1,
            "value": "40",
            "unit": "um",
            "equipment": gauge.pk,
        },
    )
    assert r.status_code == 403
    assert "past its calibration due date" in text(r)
    assert not Reading.objects.filter(lot_step=started).exists()


def test_reading_before_start_refused(op_client, measured_step):
    r = htmx_post(
        op_client,
        reading_url(measured_step),
        {"quantity": "surface_copper", "sample_index": 1, "value": "40", "unit": "um"},
    )
    assert r.status_code == 409
    assert "before recording readings" in text(r)


def test_repeat_with_same_key_records_once_and_renders_same(op_client, started):
    data = {
        "quantity": "surface_copper",
        "sample_index": 1,
        "value": "40",
        "unit": "um",
        "captured_at": timezone.now().isoformat(),
        "idempotency_key": "same-key",
    }
    first = htmx_post(op_client, reading_url(started), data)
    again = htmx_post(op_client, reading_url(started), data)
    assert first.status_code == again.status_code == 201
    assert Reading.objects.filter(lot_step=started).count() == 1
    assert "✓ In window" in text(again)
    changed = htmx_post(op_client, reading_url(started), {**data, "value": "41"})
    assert changed.status_code == 422
    assert "already used for a different request" in text(changed)
    assert Reading.objects.filter(lot_step=started).count() == 1


def test_key_in_header_is_honoured(op_client, started):
    data = {"quantity": "surface_copper", "sample_index": 1, "value": "40", "unit": "um"}
    for _ in range(2):
        htmx_post(op_client, reading_url(started), data, HTTP_IDEMPOTENCY_KEY="hdr-1")
    assert Reading.objects.filter(lot_step=started).count() == 1


def test_second_value_for_same_sample_needs_correction(op_client, started):
    base = {"quantity": "surface_copper", "sample_index": 1, "unit": "um"}
    htmx_post(op_client, reading_url(started), {**base, "value": "40"})
    r = htmx_post(op_client, reading_url(started), {**base, "value": "41"})
    assert r.status_code == 409
    assert "record a correction" in text(r)


def test_correction_supersedes_and_shows_old_struck_through(op_client, started):
    htmx_post(
        op_client,
        reading_url(started),
        {
            "quantity": "surface_copper",
            "sample_index": 1,
            "value": "20",
            "unit": "um",
            "confirm_out_of_window": "1",
        },
    )
    old = Reading.objects.get(lot_step=started)
    url = f"/floor/readings/{old.pk}/correct/"
    r = htmx_post(op_client, url, {"value": "40", "unit": "um", "reason": ""})
    assert r.status_code == 400 and "Reason" in text(r)
    assert Reading.objects.filter(lot_step=started).count() == 1
    r = htmx_post(
        op_client,
        url,
        {"value": "40", "unit": "um", "reason": "gauge not zeroed", "idempotency_key": "c-1"},
    )
    assert r.status_code == 201
    body = text(r)
    assert "<s>20 um</s>" in body and "superseded" in body and "gauge not zeroed" in body
    assert "✓ In window" in body
    old.refresh_from_db()
    assert old.superseded_by is not None and old.correction_reason == "gauge not zeroed"
    assert Reading.objects.filter(lot_step=started).count() == 2
    again = htmx_post(
        op_client,
        url,
        {"value": "40", "unit": "um", "reason": "gauge not zeroed", "idempotency_key": "c-2"},
    )
    assert again.status_code == 409 and "already corrected" in text(again)


def test_non_htmx_reading_post_redirects_back(op_client, started):
    r = op_client.post(
        reading_url(started),
        {"quantity": "surface_copper", "sample_index": 1, "value": "40", "unit": "um"},
    )
    assert r.status_code == 302
    r = op_client.post(
        reading_url(started),
        {"quantity": "surface_copper", "sample_index": 1, "value": "x", "unit": "um"},
    )
    assert r.status_code == 400 and "is not a number" in text(r)


# --- sign-off -------------------------------------------------------------------------


def fill_plan(step: LotStep, person: Person) -> None:
    from shopfloor.core import judging
    from shopfloor.floor import services

    for group in judging.group_plan(step.plan):
        m = group.window()
        for s in range(1, group.samples + 1):
            services.record_reading(
                person=person,
                lot_step_id=step.pk,
                data=services.ReadingInput(
                    quantity=m["quantity"],
                    value=helpers.in_window_value(m),
                    unit=m["unit"],
                    sample_index=s,
                ),
            )


def test_complete_refused_while_readings_missing(op_client, started):
    r = op_client.post(
        f"/floor/steps/{started.pk}/complete/", {"pin": PIN, "meaning": "performed_by"}
    )
    assert r.status_code == 409
    assert "readings missing: surface_copper: 0 of 5 samples" in text(r)
    started.refresh_from_db()
    assert started.status == LotStep.Status.IN_PROGRESS and started.signature is None


def test_complete_wrong_pin_then_sign(op_client, started, operator):
    fill_plan(started, operator)
    r = op_client.post(
        f"/floor/steps/{started.pk}/complete/", {"pin": "9999", "meaning": "performed_by"}
    )
    assert r.status_code == 403
    assert "Wrong PIN. 4 more wrong attempt(s)" in text(r)
    started.refresh_from_db()
    assert started.status == LotStep.Status.IN_PROGRESS
    page = text(op_client.get(f"/floor/lots/{started.lot.code}/"))
    assert "Performed by</strong> Olu Operator" in page
    r = op_client.post(
        f"/floor/steps/{started.pk}/complete/",
        {"pin": PIN, "meaning": "performed_by", "idempotency_key": "sign-1"},
        follow=True,
    )
    assert r.status_code == 200
    assert "signed off. Performed by: Olu Operator." in text(r)
    started.refresh_from_db()
    assert started.status == LotStep.Status.DONE
    assert started.signature.meaning == Signature.Meaning.PERFORMED
    assert started.signature.printed_name == "Olu Operator"


def test_complete_with_unknown_meaning_refused(op_client, started, operator):
    fill_plan(started, operator)
    r = op_client.post(f"/floor/steps/{started.pk}/complete/", {"pin": PIN, "meaning": "approved"})
    assert r.status_code == 400
    started.refresh_from_db()
    assert started.status == LotStep.Status.IN_PROGRESS


def test_pause_and_resume(op_client, started):
    r = op_client.post(f"/floor/steps/{started.pk}/pause/", {}, follow=True)
    assert "Paused" in text(r)
    started.refresh_from_db()
    assert started.status == LotStep.Status.PAUSED
    assert "Resume step" in text(r)
    r = op_client.post(f"/floor/steps/{started.pk}/pause/", {})
    assert r.status_code == 409 and "is not in progress" in text(r)


def test_csrf_enforced(floor, operator, measured_step):
    client = Client(enforce_csrf_checks=True)
    client.force_login(operator.user)
    r = client.post(f"/floor/steps/{measured_step.pk}/start/", {})
    assert r.status_code == 403
    measured_step.refresh_from_db()
    assert measured_step.status == LotStep.Status.WAITING


def test_get_on_post_only_view_is_405(op_client, measured_step):
    assert op_client.get(f"/floor/steps/{measured_step.pk}/start/").status_code == 405


# --- traveller ------------------------------------------------------------------------


@pytest.mark.skipif(not shutil.which("zbarimg"), reason="zbar-tools not installed")
def test_qr_png_decodes_to_lot_code(floor, tmp_path):
    png = tmp_path / "qr.png"
    png.write_bytes(traveller.qr_png(floor.lot.code))
    out = subprocess.run(
        ["zbarimg", "--quiet", "--raw", str(png)], capture_output=True, text=True, check=True
    )
    assert out.stdout.strip() == floor.lot.code


@pytest.mark.skipif(not shutil.which("pdftotext"), reason="poppler-utils not installed")
def test_traveller_pdf_text(op_client, floor, tmp_path):
    r = op_client.get(f"/floor/lots/{floor.lot.code}/traveller.pdf")
    assert r.status_code == 200 and r["Content-Type"] == "application/pdf"
    pdf = tmp_path / "t.pdf"
    pdf.write_bytes(r.content)
    out = subprocess.run(
        ["pdftotext", "-layout", str(pdf), "-"], capture_output=True, text=True, check=True
    ).stdout
    flat = " ".join(out.split())
    assert floor.routing.part_revision.part.number in flat
    assert floor.lot.code in flat and floor.job.number in flat
    assert "IPC-4552A" in flat  # a window source from the ENIG steps
    assert "Performed by" in flat and "HAZARD" in flat


def test_traveller_pdf_unknown_lot(op_client, floor):
    assert op_client.get("/floor/lots/NOPE/traveller.pdf").status_code == 404


def test_gauge_factory_equipment_shown_on_its_work_center(op_client, floor):
    # The factory's gauge sits at the first step's work center; its due date is shown.
    assert isinstance(floor.gauge, Equipment)
    body = text(op_client.get(f"/floor/lots/{floor.lot.code}/"))
    due = (timezone.localdate() + dt.timedelta(days=90)).strftime("%Y-%m-%d")
    assert floor.gauge.code in body and due in body
