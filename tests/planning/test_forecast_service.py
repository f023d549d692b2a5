"""The forecast on the Django side: a run stores P50 / P90 per lot and job, the board,
the lot and job pages show them, at-risk comes from the forecast (the flow factor only
while none exists), one run at a time, the quote API and page, the validate command."""

from __future__ import annotations

import datetime as dt
import json

import pytest
from django.core.management import call_command
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.utils import timezone
from rest_framework.test import APIClient

from routing.builder.examples import EXAMPLE_SPECS
from shopfloor.planning import services, tasks
from shopfloor.planning.models import (
    ForecastRun,
    Holiday,
    JobForecast,
    LotForecast,
    WorkCenterCapacity,
    parse_shifts,
)
from shopfloor.plant.models import WorkCenter
from tests.board.test_board_queries import BOARD_QUERIES
from tests.factories import bulk_lots

pytestmark = pytest.mark.django_db


def _run(**kw):
    kw.setdefault("replications", 20)
    kw.setdefault("seed", 5)
    run = services.run_forecast(ForecastRun.Trigger.COMMAND, **kw)
    assert run is not None and run.status == ForecastRun.Status.DONE
    return run


def test_run_stores_every_active_lot_and_job(floor):
    run = _run()
    assert run.lot_count == 1 and run.job_count == 1
    lot_fc = LotForecast.objects.get(run=run, lot=floor.lot)
    job_fc = JobForecast.objects.get(run=run, job=floor.job)
    now = timezone.now()
    assert now < lot_fc.p50 <= lot_fc.p90
    # a job finishes with its last lot (its only lot here)
    assert (job_fc.p50, job_fc.p90) == (lot_fc.p50, lot_fc.p90)
    # with no history and no capacity records the lot runs on standard minutes round the
    # clock: its median finish is near the sum of its steps' standard minutes
    remaining = sum(s.standard_minutes for s in floor.lot.steps.all())
    p50_minutes = (lot_fc.p50 - now).total_seconds() / 60
    assert p50_minutes == pytest.approx(remaining, rel=0.1)
    assert not job_fc.at_risk


def test_forecast_decides_at_risk_and_the_board_shows_it(floor, client):
    client.force_login(floor.personas["supervisor"].user)
    # Before any forecast: the flow-factor fallback says on time (due in 10 days).
    body = client.get("/board/").content.decode()
    assert "flow-factor rule (no fresh forecast yet)" in body
    assert "on time" in body and "AT RISK" not in body
    # The shop closes for the next 30 days: the forecast now finishes after the due date.
    today = timezone.localdate()
    Holiday.objects.bulk_create(
        [Holiday(date=today + dt.timedelta(days=k), name="shutdown") for k in range(31)]
    )
    run = _run()
    assert JobForecast.objects.get(run=run, job=floor.job).at_risk
    body = client.get("/board/").content.decode()
    assert "due risk from the finish forecast of" in body
    assert "AT RISK" in body
    assert "P50 " in body and "P90 " in body
    # the job and lot pages show the same forecast
    job_page = client.get(f"/quality/jobs/{floor.job.number}/").content.decode()
    assert "Projected finish" in job_page and "AT RISK" in job_page
    lot_page = client.get(f"/quality/lots/{floor.lot.code}/").content.decode()
    assert "Projected finish" in lot_page and "P90" in lot_page


def test_stale_forecast_falls_back_to_the_flow_factor(floor, client, settings):
    run = _run()
    ForecastRun.objects.filter(pk=run.pk).update(
        finished_at=timezone.now() - dt.timedelta(minutes=settings.FORECAST_STALE_MINUTES + 1)
    )
    client.force_login(floor.personas["supervisor"].user)
    assert "no fresh forecast yet" in client.get("/board/").content.decode()
    assert services.lot_projection(floor.lot) is None


@pytest.mark.parametrize("size", [20, 2000])
def test_board_queries_unchanged_with_a_forecast(floor, client, size):
    centers = list(WorkCenter.objects.order_by("code")[:6])
    bulk_lots(floor.routing, floor.job, size - 1, centers)
    _run(replications=10)
    client.force_login(floor.personas["supervisor"].user)
    for params in ({}, {"sort": "due"}):
        with CaptureQueriesContext(connection) as ctx:
            response = client.get("/board/", params)
        assert response.status_code == 200
        assert len(ctx.captured_queries) == BOARD_QUERIES
        assert b"due risk from the finish forecast" in response.content


def test_one_run_at_a_time_and_a_dead_run_is_cleared(floor):
    blocker = ForecastRun.objects.create(trigger="periodic", replications=10, seed=1)
    assert services.run_forecast(replications=10) is None
    ForecastRun.objects.filter(pk=blocker.pk).update(
        started_at=timezone.now() - dt.timedelta(minutes=services.RUN_TIMEOUT_MINUTES + 1)
    )
    assert services.run_forecast(replications=10) is not None
    blocker.refresh_from_db()
    assert blocker.status == ForecastRun.Status.FAILED


def test_task_runs_the_service(floor):
    run_id = tasks.run_forecast.apply(kwargs={"trigger": "on_demand"}).get()
    assert ForecastRun.objects.get(pk=run_id).trigger == "on_demand"


def test_capacity_units_and_calendar_move_the_finish(floor):
    # one unit round the clock vs. one 8-hour weekday shift at every work center
    base = _run()
    base_p50 = LotForecast.objects.get(run=base, lot=floor.lot).p50
    for wc in WorkCenter.objects.all():
        WorkCenterCapacity.objects.create(
            work_center=wc, shifts="08:00-16:00", saturday=False, sunday=False
        )
    slow = _run()
    slow_p50 = LotForecast.objects.get(run=slow, lot=floor.lot).p50
    # 8 of 24 hours on weekdays: the ~17 h of standard work spans three shifts, so it
    # takes well over twice as long as round the clock (4.2 x only for very long work)
    now = timezone.now()
    ratio = (slow_p50 - now) / (base_p50 - now)
    assert ratio > 2.0


def test_shift_text_is_checked():
    assert parse_shifts("06:00-14:00, 22:00-06:00") == [
        (dt.time(6), dt.time(14)),
        (dt.time(22), dt.time(6)),
    ]
    with pytest.raises(ValueError, match="HH:MM-HH:MM"):
        parse_shifts("6 to 2")
    with pytest.raises(ValueError, match="00-23"):
        parse_shifts("06:00-25:00")


def test_capacity_admin_refuses_bad_shifts(floor, admin_client):
    wc = WorkCenter.objects.order_by("code").first()
    response = admin_client.post(
        "/admin/planning/workcentercapacity/add/",
        {"work_center": wc.pk, "units": 2, "batch_size": 1, "shifts": "morning", "monday": "on"},
    )
    assert response.status_code == 200
    assert b"is not HH:MM-HH:MM" in response.content
    assert not WorkCenterCapacity.objects.exists()


# --- quote -------------------------------------------------------------------------------


def _api(person):
    api = APIClient()
    api.force_authenticate(person.user)
    return api


def test_quote_api_answers_with_ship_dates(floor):
    api = _api(floor.personas["supervisor"])
    body = {"spec": EXAMPLE_SPECS["two_layer"], "quantity": 400, "priority": 50}
    r = api.post("/api/v1/planning/quote/", body, format="json")
    assert r.status_code == 200, r.content
    data = r.json()
    assert data["p50_ship_date"] <= data["p90_ship_date"]
    assert data["lots"] == 5  # 400 boards / 4 per panel = 100 panels / 20 per lot
    assert data["wip_lots"] == 1
    assert dt.date.fromisoformat(data["p50_ship_date"]) >= timezone.localdate()


def test_quote_more_boards_ship_later(floor):
    api = _api(floor.personas["process_engineer"])
    spec = EXAMPLE_SPECS["two_layer"]
    small = api.post("/api/v1/planning/quote/", {"spec": spec, "quantity": 80}, format="json")
    big = api.post("/api/v1/planning/quote/", {"spec": spec, "quantity": 8000}, format="json")
    assert small.json()["p90_finish"] < big.json()["p90_finish"]


def test_quote_refuses_bad_input_clearly(floor):
    api = _api(floor.personas["supervisor"])
    r = api.post("/api/v1/planning/quote/", {"spec": {"layers": 3}, "quantity": 10}, format="json")
    assert r.status_code == 400
    assert r.json()["problems"]
    r = api.post("/api/v1/planning/quote/", {"spec": EXAMPLE_SPECS["two_layer"]}, format="json")
    assert r.status_code == 400 and "quantity is required" in r.json()["detail"]
    r = api.post(
        "/api/v1/planning/quote/",
        {"spec": EXAMPLE_SPECS["two_layer"], "quantity": "lots"},
        format="json",
    )
    assert r.status_code == 400 and "1 to 1000000" in r.json()["detail"]
    r = api.post("/api/v1/planning/quote/", ["not", "an", "object"], format="json")
    assert r.status_code == 400


def test_quote_refused_for_operators(floor):
    r = _api(floor.personas["operator"]).post(
        "/api/v1/planning/quote/",
        {"spec": EXAMPLE_SPECS["two_layer"], "quantity": 10},
        format="json",
    )
    assert r.status_code == 403


def test_quote_page(floor, client):
    client.force_login(floor.personas["supervisor"].user)
    assert client.get("/planning/quote/").status_code == 200
    r = client.post(
        "/planning/quote/",
        {"spec": json.dumps(EXAMPLE_SPECS["two_layer"]), "quantity": "400", "priority": "100"},
    )
    assert r.status_code == 200
    assert b"Ship dates" in r.content and b"P90" in r.content
    r = client.post("/planning/quote/", {"spec": "{not json", "quantity": "4"})
    assert r.status_code == 400 and b"not valid JSON" in r.content
    client.force_login(floor.personas["operator"].user)
    assert client.get("/planning/quote/").status_code == 403


def test_validate_command_prints_exactly_the_four_keys(capsys):
    call_command(
        "planning",
        "validate",
        "--model",
        "mmc",
        "--arrival-rate",
        "1.2",
        "--service-rate",
        "1",
        "--servers",
        "2",
        "--jobs",
        "3000",
        "--seed",
        "4",
        "--format",
        "json",
    )
    out = json.loads(capsys.readouterr().out)
    assert set(out) == {"mean_time_in_system", "mean_in_queue", "utilisation", "replications"}
    # Erlang C, c = 2, a = 1.2: C = 0.45, Wq = 0.45 / 0.8 = 0.5625, W = 1.5625
    assert out["mean_time_in_system"] == pytest.approx(1.5625, rel=0.1)
    assert out["utilisation"] == pytest.approx(0.6, abs=0.03)


def test_jobs_api_and_job_page_carry_the_forecast(floor, client):
    api = _api(floor.personas["supervisor"])
    before = api.get(f"/api/v1/jobs/{floor.job.number}/").json()
    assert before["projected_finish"] is None and before["forecast_due_state"] is None
    run = _run()
    fc = JobForecast.objects.get(run=run, job=floor.job)
    read = api.get(f"/api/v1/jobs/{floor.job.number}/").json()
    assert dt.datetime.fromisoformat(read["projected_finish"]) == fc.p50
    assert dt.datetime.fromisoformat(read["projected_finish_p90"]) == fc.p90
    assert read["forecast_due_state"] == "on_time"
    client.force_login(floor.personas["supervisor"].user)
    page = client.get(f"/jobs/{floor.job.number}/").content.decode()
    assert "P50 " in page and "P90 " in page


def test_due_date_alert_follows_the_forecast(floor):
    from shopfloor.quality.models import Alert
    from shopfloor.quality.services import deadlines

    # on time by the flow factor (due in 10 days), late by the forecast (shop shut 30 days)
    assert deadlines.check_due_dates()["at_risk"] == 0
    today = timezone.localdate()
    Holiday.objects.bulk_create(
        [Holiday(date=today + dt.timedelta(days=k), name="shutdown") for k in range(31)]
    )
    _run()
    assert deadlines.check_due_dates()["at_risk"] == 1
    alert = Alert.objects.get(job=floor.job, kind=Alert.Kind.DUE_RISK)
    assert "forecast P90 finish" in alert.message
