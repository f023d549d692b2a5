"""The gauge-file upload page: a CSV export recorded as one batch, line by line.

CSV syntax per RFC 4180 (header row, quoted fields, CRLF line ends); a UTF-8 byte-order
mark as spreadsheet programs write it (common practice). 1 mil = 25.4 µm exactly (NIST
SP 811, appendix B).
"""

from __future__ import annotations

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.test import Client

from shopfloor.floor import csv_upload
from shopfloor.floor.models import Reading
from tests import helpers
from tests.factories import make_person

pytestmark = pytest.mark.django_db

URL = "/floor/readings/upload/"


def upload(client: Client, text: str | bytes, key: str = "k1", name: str = "gauge.csv"):
    data = text.encode() if isinstance(text, str) else text
    return client.post(
        URL, {"file": SimpleUploadedFile(name, data, "text/csv"), "idempotency_key": key}
    )


@pytest.fixture
def operator_client(floor):
    client = Client()
    client.force_login(floor.personas["operator"].user)
    return client


def test_parser_reads_rfc4180_with_bom_quotes_and_crlf():
    text = '\ufefflot,quantity,value,unit,position\r\nL-1,surface_copper,"42.5",um,"edge, top"\r\n'
    parsed = csv_upload.read(text.encode())
    assert parsed.rows[0]["lot"] == "L-1" and parsed.rows[0]["position"] == "edge, top"
    assert parsed.rows[0]["_line"] == 2 and len(parsed.digest) == 64


def test_parser_reads_semicolons():
    parsed = csv_upload.read(b"lot;quantity;value;unit\nL-1;surface_copper;42,5;um\n")
    assert parsed.rows[0]["value"] == "42,5"  # refused later by the value check, not here


@pytest.mark.parametrize(
    ("data", "says"),
    [
        (b"", "empty"),
        (b"lot,quantity,value\nL,q,1\n", "Missing column(s): unit"),
        (b"lot,quantity,value,unit,colour\nL,q,1,um,red\n", "Unknown column(s): colour"),
        (b"lot,quantity,value,unit\n", "no readings"),
        (b"lot,quantity,value,unit\nL,q,\xff,um\n", "not UTF-8"),
        (b"lot,lot,quantity,value,unit\nL,L,q,1,um\n", "named twice"),
        (b"lot,quantity,value,unit\n" + b"L,q,1,um\n" * 1001, "more than 1,000"),
        (b"x" * (csv_upload.MAX_BYTES + 1), "at most"),
    ],
)
def test_parser_refuses_a_bad_file_saying_why(data, says):
    with pytest.raises(csv_upload.FileProblem, match=None) as caught:
        csv_upload.read(data)
    assert says in str(caught.value)


def test_upload_records_each_line_and_a_second_upload_records_nothing(floor, operator_client):
    step = helpers.start_at(floor, floor.lot)
    text = (
        "lot,quantity,value,unit,sample_index\n"
        f"{floor.lot.code},surface_copper,1.75,mil,1\n"
        f"{floor.lot.code},hole_wall_copper,abc,um,1\n"
        f"NO-SUCH-LOT,surface_copper,45,um,1\n"
    )
    reply = upload(operator_client, text)
    assert reply.status_code == 200
    page = reply.content.decode()
    assert "1 recorded" in page and "2 refused" in page
    assert "line 3" in page and "No lot" in page
    reading = Reading.objects.get(lot_step=step)
    assert reading.value == pytest.approx(1.75 * 25.4)  # 1 mil = 25.4 µm exactly
    assert reading.via == "upload"
    # The same file again (a new form, so a new idempotency key): duplicates only.
    again = upload(operator_client, text, key="k2").content.decode()
    assert "0 recorded" in again and "1 already there" in again
    assert Reading.objects.count() == 1
    # The same form posted twice: the stored result.
    replay = upload(operator_client, text, key="k2").content.decode()
    assert "already uploaded" in replay


def test_a_bad_file_is_refused_whole_with_the_reason(floor, operator_client):
    reply = upload(operator_client, "lot,quantity\nL,q\n")
    assert reply.status_code == 400
    assert "Missing column(s): value, unit" in reply.content.decode()
    assert Reading.objects.count() == 0


def test_lines_at_another_work_center_are_refused(floor):
    helpers.start_at(floor, floor.lot)
    other = make_person("operator", "9911", "Other Operator")
    client = Client()
    client.force_login(other.user)
    reply = upload(client, f"lot,quantity,value,unit\n{floor.lot.code},surface_copper,45,um\n")
    assert reply.status_code == 200
    assert "not assigned to the work center" in reply.content.decode()
    assert Reading.objects.count() == 0


def test_quality_engineer_may_not_upload(floor):
    client = Client()
    client.force_login(floor.personas["quality_engineer"].user)
    assert client.get(URL).status_code == 403


def test_confirm_lines_with_a_forged_or_empty_row_records_nothing(floor, client):
    """The "store as measured" form carries each stopped line; a line that is not a
    plain object of text fields is left out, and with nothing left nothing is saved."""
    client.force_login(floor.personas["operator"].user)
    response = client.post(
        "/floor/readings/upload/",
        {"confirm_lines": "1", "confirm": ["3", "4"], "held-3": "[1, 2]", "held-4": "{bad"},
    )
    assert response.status_code == 400
    assert "No line was ticked" in response.content.decode()
    assert not Reading.objects.exists()
