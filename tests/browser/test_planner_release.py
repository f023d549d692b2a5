"""A planner enters a job and releases it in the browser; an engineer authors a spec in
the form with the stack-up editor and live preview (desk size, 1366x768)."""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone

from shopfloor.plant.models import Panel, PartRevision
from tests.browser.conftest import ARTIFACTS

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]
DESK = {"width": 1366, "height": 768}


def test_planner_enters_and_releases_a_job(persona_page, floor):
    page = persona_page("planner", viewport=DESK)
    pr = PartRevision.objects.get(pk=floor.routing.part_revision_id)
    page.goto("/jobs/new/")
    page.click("button:has-text('Enter the job')")
    page.wait_for_selector("text=nothing was saved")
    assert page.locator(".field-error").count() >= 4  # every problem at once, by its field
    page.fill("input[name=customer]", pr.part.customer.code)
    page.fill("input[name=part_number]", pr.part.number)
    page.fill("input[name=part_revision]", pr.revision)
    page.fill("input[name=quantity]", "200")
    page.fill("input[name=due_date]", (timezone.localdate() + dt.timedelta(days=20)).isoformat())
    page.click("button:has-text('Enter the job')")
    page.wait_for_selector("text=Entered (not released)")
    page.fill("form.release-form input[name=boards_per_panel]", "8")
    # ceil(200 / 8 x 1.08) = 27 panels, in lots of at most 12: 9, 9, 9 (live, htmx)
    page.wait_for_selector("#release-plan >> text=27 panels")
    page.click("#release-button")
    page.wait_for_selector("text=Released to the floor")
    number = page.locator("h1").inner_text().split()[1]
    assert Panel.objects.filter(images__job__number=number).count() == 27
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "planner-job-released-1366x768.png"), full_page=True)


def test_engineer_authors_a_spec_with_the_stackup_editor(persona_page, floor):
    page = persona_page("process_engineer", viewport=DESK)
    page.goto(f"/engineering/part-revisions/{floor.routing.part_revision_id}/spec/")
    page.wait_for_selector("#spec-preview >> text=The spec is valid")
    page.select_option("select[name=finish]", "osp")
    for _ in range(2):
        page.click("button[data-add-row=stackup]")
    page.select_option("select[name=stackup-0-kind]", "copper")
    page.fill("input[name=stackup-0-thickness_um]", "0.5 oz")
    page.select_option("select[name=stackup-1-kind]", "core")
    page.fill("input[name=stackup-1-thickness_um]", "1500")
    # A 4-layer board with a 2-row stack-up: the live preview names the problem.
    page.wait_for_selector("#spec-preview >> text=copper layers")
    page.click("tr[data-row]:nth-child(2) [data-remove]")
    page.click("tr[data-row]:nth-child(1) [data-remove]")
    page.wait_for_selector("#spec-preview >> text=The spec is valid")
    page.fill("input[name=reason]", "finish to OSP")
    page.click("button:has-text('Make this preview a draft revision')")
    page.wait_for_selector("text=routing r2")
    assert "osp" in page.content().lower()
    page.screenshot(path=str(ARTIFACTS / "engineer-draft-from-form-1366x768.png"))
