"""Text that reaches CSV and PDF files (issue 14, findings 2 and 3).

CSV: OWASP's CSV injection guidance (https://owasp.org/www-community/attacks/CSV_Injection)
lists the characters that make a spreadsheet evaluate a cell: = + - @, tab and carriage
return; such text cells must start with an apostrophe. PDF: reportlab's Paragraph reads
markup, so every free-text field and code must be printed as typed (an NCR note with an
<img src=...> tag must not embed a server file; a lot code with <i> must not break the
PDF). Each export is exercised through its real URL, with markup and formulas in every
free-text field and code that reaches it.
"""

from __future__ import annotations

import csv
import io
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from django.test import Client

from shopfloor.floor import services as floor_services
from shopfloor.plant.models import Customer, Equipment, Part, Person
from shopfloor.quality.models import Hold, Nonconformance
from shopfloor.quality.services import alerts, dispositions
from shopfloor.safe_output import FORMULA_STARTS, csv_cell, pdf_text
from tests import factories, helpers
from tests.factories import PIN

REPO = Path(__file__).resolve().parents[2]

IMG_TAG = '<img src="/etc/hostname" width="40" height="10"/>'
BROKEN = "<img src=x onerror=alert(1)> <b>unclosed <i>"
FORMULA = '=HYPERLINK("http://example.invalid/x","click")'


# --- the rules themselves ----------------------------------------------------------------


@pytest.mark.parametrize("start", FORMULA_STARTS)
def test_every_formula_start_is_defused(start):
    assert csv_cell(f"{start}1+1") == f"'{start}1+1"


def test_plain_text_and_numbers_are_left_alone():
    assert csv_cell("re-measured") == "re-measured"
    assert csv_cell(-3.5) == -3.5  # a negative reading is a number, not a formula
    assert csv_cell(None) == ""


def test_pdf_text_escapes_markup_and_drops_control_characters():
    assert pdf_text("<i>a & b</i>\x00") == "&lt;i&gt;a &amp; b&lt;/i&gt;"


# --- no module can bypass them ---------------------------------------------------------


def _sources() -> list[Path]:
    skip = {"var", "tests", "bench", ".git", "node_modules"}
    return [
        p
        for p in REPO.rglob("*.py")
        if not (set(p.relative_to(REPO).parts) & skip) and p.name != "safe_output.py"
    ]


def test_every_csv_and_pdf_writer_goes_through_safe_output():
    problems = []
    for path in _sources():
        text = path.read_text()
        for pattern, why in [
            (r"\bcsv\.(writer|DictWriter)\(", "use shopfloor.safe_output.csv_writer"),
            (
                r"from reportlab\.platypus import[^\n]*\bParagraph\b|"
                r"from reportlab\.platypus import \([^)]*\bParagraph\b[^)]*\)|"
                r"platypus\.Paragraph\b|platypus\.paragraph\b",
                "use shopfloor.safe_output.pdf_paragraph",
            ),
        ]:
            for m in re.finditer(pattern, text, re.S):
                line = text[: m.start()].count("\n") + 1
                problems.append(f"{path.relative_to(REPO)}:{line}: {why}")
    assert not problems, "\n".join(problems)


# --- through the real exports -------------------------------------------------------------


@pytest.fixture
def hostile(floor):
    """A lot whose every free-text field and code carries markup or a formula."""
    Customer.objects.filter(pk=floor.job.part_revision.part.customer_id).update(
        code="=CUST<i>", name="+Cust <b>"
    )
    Part.objects.filter(pk=floor.job.part_revision.part_id).update(number="@PN<i>")
    Person.objects.filter(pk=floor.personas["operator"].pk).update(printed_name=f"-Op {BROKEN}")
    floor.personas["operator"].refresh_from_db()
    lot = factories.new_lot(floor, code="L<i>=1")
    step = helpers.start_at(floor, lot)
    Equipment.objects.filter(work_center=step.work_center).update(name="<i>gauge")
    good = helpers.record(floor, step, "hole_wall_copper", 25.0)
    floor_services.correct_reading(
        person=floor.personas["operator"],
        reading_id=good.pk,
        value=26,
        unit="um",
        reason=f"{FORMULA} {IMG_TAG}",
    )
    bad = helpers.record(floor, step, "surface_copper", 80.0)
    alerts.handle_event(helpers.event_for(bad).pk)
    ncr = Nonconformance.objects.get(lot=lot)
    Nonconformance.objects.filter(pk=ncr.pk).update(description=f"@SUM(1) {BROKEN}")
    Hold.objects.filter(lot=lot).update(reason=f"+{IMG_TAG}")
    dispositions.disposition_ncr(
        floor.personas["quality_engineer"],
        ncr.pk,
        "use_as_is",
        f"{IMG_TAG} {BROKEN}",
        PIN,
        root_cause="process_drift",
        corrective_action=f"{FORMULA} {IMG_TAG}",
    )
    client = Client()
    client.force_login(floor.personas["quality_engineer"].user)
    return lot, client


@pytest.mark.django_db
def test_lot_csv_neutralises_every_formula(hostile):
    lot, client = hostile
    reply = client.get(f"/quality/lots/{lot.code}/readings.csv")
    assert reply.status_code == 200
    rows = list(csv.reader(io.StringIO(b"".join(reply.streaming_content).decode())))
    cells = [c for row in rows for c in row]
    assert any("HYPERLINK" in c for c in cells)  # the reason is there...
    dangerous = [c for c in cells if c.startswith(FORMULA_STARTS)]
    assert dangerous == []  # ...but no cell starts a formula
    assert f"'{FORMULA} {IMG_TAG}" in cells
    assert "'L<i>=1" not in cells and "L<i>=1" in cells  # only formula starts are changed


def _pdf_text(pdf: bytes) -> str:
    if not shutil.which("pdftotext"):
        pytest.skip("pdftotext (poppler-utils) is not installed")
    done = subprocess.run(
        ["pdftotext", "-layout", "-", "-"], input=pdf, capture_output=True, check=True
    )
    return re.sub(r"\s+", " ", done.stdout.decode())


@pytest.mark.django_db
@pytest.mark.parametrize(
    # (the certificate PDF comes with a shipment now: tests/shipping reads it back)
    "what",
    ["record.pdf", "traveller", "label"],
    ids=str,
)
def test_pdfs_print_markup_as_typed(hostile, what):
    lot, client = hostile
    from urllib.parse import quote

    code = quote(lot.code)
    url = {
        "traveller": f"/floor/lots/{code}/traveller.pdf",
        "label": f"/jobs/lots/{code}/label.pdf",
    }.get(what, f"/quality/lots/{code}/{what}")
    if what == "traveller":
        client.force_login(Person.objects.get(badge_number=hostile_badge(lot)).user)
    reply = client.get(url)
    assert reply.status_code == 200, reply.content[:500]
    pdf = reply.content
    text = _pdf_text(pdf)
    assert "L<i>=1" in text  # the lot code as typed
    if what == "label":
        assert "@PN<i>" in text and "=CUST<i>" in text
    elif what != "traveller":
        assert "<img src=" in text  # the note printed, not obeyed
        # No raster image at all: the only pictures in the record are vector charts.
        assert b"/Subtype /Image" not in pdf
    else:
        assert "@PN<i>" in text


def hostile_badge(lot) -> str:
    """The operator who worked the lot may read its traveller."""
    return lot.steps.exclude(started_by=None).first().started_by.badge_number
