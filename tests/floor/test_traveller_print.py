"""The printed traveller: its code scans at 300 dpi, e-signed steps print who, what the
signature means and when, reading cells carry their windows, each hazard caution prints
once, and the paper is the site's.

External references: the QR code (ISO/IEC 18004) is decoded by zbar (`zbarimg`), an
independent decoder, from the page rasterised by poppler's `pdftoppm` at 300 dpi (a
common office scanner resolution: common practice). Paper sizes: ISO 216 A4 is
210 × 297 mm = 595.28 × 841.89 pt; US Letter (ANSI/ASME Y14.1) is 8.5 × 11 in =
612 × 792 pt (1 pt = 1/72 in).
"""

from __future__ import annotations

import re
import shutil
import subprocess

import pytest

from shopfloor.floor import services as floor_services
from shopfloor.floor import traveller
from shopfloor.plant.models import SiteSettings
from tests import factories

pytestmark = [
    pytest.mark.django_db,
    pytest.mark.skipif(
        not (shutil.which("pdftoppm") and shutil.which("zbarimg") and shutil.which("pdftotext")),
        reason="needs poppler-utils (pdftoppm, pdftotext) and zbar-tools (zbarimg)",
    ),
]


def _text(pdf: bytes, tmp_path) -> str:
    path = tmp_path / "t.pdf"
    path.write_bytes(pdf)
    out = subprocess.run(
        ["pdftotext", "-raw", str(path), "-"], capture_output=True, text=True, check=True
    ).stdout
    return " ".join(out.split())


def test_code_decodes_from_the_page_at_300_dpi(floor, tmp_path):
    pdf = tmp_path / "t.pdf"
    pdf.write_bytes(traveller.traveller_pdf(floor.lot))
    subprocess.run(
        ["pdftoppm", "-r", "300", "-png", "-f", "1", "-l", "1", str(pdf), str(tmp_path / "page")],
        check=True,
    )
    (page,) = tmp_path.glob("page*.png")
    out = subprocess.run(
        ["zbarimg", "--quiet", "--raw", str(page)], capture_output=True, text=True, check=False
    )
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip().splitlines() == [floor.lot.code]


def test_signed_step_prints_signer_meaning_and_time(floor, tmp_path):
    op = floor.personas["operator"]
    first = floor.lot.steps.order_by("position").first()
    floor_services.start_step(person=op, lot_step_id=first.pk)
    floor_services.complete_step(person=op, lot_step_id=first.pk, pin=factories.PIN)
    first.refresh_from_db()
    sig = first.signature
    assert sig is not None
    flat = _text(traveller.traveller_pdf(floor.lot), tmp_path)
    when = f"{sig.signed_at:%Y-%m-%d %H:%M}"  # the site's zone is UTC in the tests
    assert f"Performed by: {op.printed_name} · {when} (UTC) · signed electronically" in flat
    # the steps not yet signed keep the boxes to sign on paper
    assert flat.count("signed electronically") == 1
    assert "Performed by Date" in flat or ("Performed by" in flat and "Date" in flat)


def test_reading_cells_carry_window_and_what_it_applies_to(floor, tmp_path):
    flat = _text(traveller.traveller_pdf(floor.lot), tmp_path)
    plans = [s for s in floor.lot.steps.order_by("position") if s.plan]
    assert plans
    for step in plans:
        for entry in step.plan:
            what = entry.get("applies_to") or "each_reading"
            word = {
                "each_reading": "each reading",
                "mean": "average of the set",
                "minimum": "smallest of the set",
                "maximum": "largest of the set",
                "range": "range of the set",
            }[what]
            assert (word in flat) or entry.get("attribute"), word
    # numbered sample cells: a five-sample set prints cells 1 to 5
    five = [s for s in plans if any(int(e.get("samples") or 1) >= 5 for e in s.plan)]
    if five:
        assert re.search(r"\b1 2 3 4 5\b", flat)


def test_each_hazard_caution_prints_once(floor, tmp_path):
    flat = _text(traveller.traveller_pdf(floor.lot), tmp_path)
    hazards = [s for s in floor.lot.steps.order_by("position") if s.hazard]
    distinct = {" ".join(s.hazard.split()) for s in hazards}
    assert flat.count("HAZARD:") == len(hazards)
    assert flat.count("the same caution as at step") == len(hazards) - len(distinct)
    for text in distinct:
        assert flat.count(" ".join(text.split())[:40]) == 1


@pytest.fixture
def op_client(client, floor):
    client.force_login(floor.personas["operator"].user)
    return client


def test_paper_is_the_sites_unless_asked(floor, op_client, tmp_path):
    def size(pdf: bytes) -> tuple[float, float]:
        path = tmp_path / "s.pdf"
        path.write_bytes(pdf)
        info = subprocess.run(
            ["pdfinfo", str(path)], capture_output=True, text=True, check=True
        ).stdout
        w, h = re.search(r"Page size:\s+([\d.]+) x ([\d.]+) pts", info).groups()
        return round(float(w), 1), round(float(h), 1)

    url = f"/floor/lots/{floor.lot.code}/traveller.pdf"
    assert size(op_client.get(url).content) == (595.3, 841.9)  # A4 by default
    SiteSettings.objects.update_or_create(pk=1, defaults={"paper_size": "letter"})
    assert size(op_client.get(url).content) == (612.0, 792.0)  # the site's Letter
    assert size(op_client.get(url + "?paper=a4").content) == (595.3, 841.9)  # asked for
    refused = op_client.get(url + "?paper=tabloid")
    assert refused.status_code == 400 and "paper=a4 or paper=letter" in refused.content.decode()
