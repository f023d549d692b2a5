"""Design import through the command, the API and the engineering page: same shape,
clear refusals (400 / exit 2) naming what was found, nothing saved.

Expected values of the shared files are read from the files themselves (see
test_real_files.py for where in each file); the small files are written here.
"""

from __future__ import annotations

import io
import json

import pytest
from django.core.management import call_command
from django.test import Client
from rest_framework.test import APIClient

from routing.models import RoutingRevision, RoutingStep
from shopfloor.plant.models import PartRevision
from tests.design_import.test_edges import BOMB, design_xml

pytestmark = pytest.mark.django_db
URL = "/api/v1/routing/import-design/"
SHAPE = {"spec", "to_fill", "warnings", "source"}
SOURCE_KEYS = {"revision", "units", "exporter"}


def counts():
    return (
        RoutingRevision.objects.count(),
        RoutingStep.objects.count(),
        PartRevision.objects.count(),
    )


def upload(text: str | bytes, name: str = "board.xml") -> io.BytesIO:
    data = text.encode() if isinstance(text, str) else text
    handle = io.BytesIO(data)
    handle.name = name
    return handle


def api_for(person) -> APIClient:
    client = APIClient()
    client.force_login(person.user)
    return client


def page_for(person) -> Client:
    client = Client()
    client.force_login(person.user)
    return client


def command(*args):
    out, err = io.StringIO(), io.StringIO()
    try:
        call_command("routing", *args, stdout=out, stderr=err)
        code = 0
    except SystemExit as exc:
        code = exc.code
    return code, out.getvalue(), err.getvalue()


# --------------------------------------------------------------------------- API


def test_api_returns_the_import_shape_and_saves_nothing(floor, personas):
    before = counts()
    reply = api_for(personas["process_engineer"]).post(
        URL, {"file": upload(design_xml(units="INCH"))}, format="multipart"
    )
    assert reply.status_code == 200, reply.content
    data = reply.json()
    assert set(data) == SHAPE
    assert SOURCE_KEYS <= set(data["source"])
    assert data["source"]["units"] == "INCH" and data["source"]["revision"] == "C"
    assert data["spec"]["layers"] == 2
    assert "finish" in data["to_fill"] and "ipc_class" in data["to_fill"]
    assert counts() == before


@pytest.mark.parametrize(
    ("body", "found"),
    [
        ('<?xml version="1.0"?><svg xmlns="http://www.w3.org/2000/svg"/>', "root element is <svg>"),
        (design_xml(revision="A"), "revision 'A'"),
        (BOMB, "DTD"),
        ("this is not xml", "not an XML file"),
    ],
    ids=["not 2581", "revision A", "entity bomb", "not xml"],
)
def test_api_refuses_bad_files_with_the_error_shape(floor, personas, body, found):
    before = counts()
    reply = api_for(personas["process_engineer"]).post(
        URL, {"file": upload(body)}, format="multipart"
    )
    assert reply.status_code == 400
    data = reply.json()
    assert data["error"] == "invalid" and found in data["detail"]
    assert data["problems"][0]["field"] == "file"
    assert "revision B, B1, C" in data["problems"][0]["allowed"]
    assert counts() == before


def test_api_without_a_file_says_how_to_send_it(floor, personas):
    reply = api_for(personas["process_engineer"]).post(URL, {}, format="multipart")
    assert reply.status_code == 400
    assert "multipart form field 'file'" in reply.json()["detail"]


def test_api_wants_multipart(floor, personas):
    reply = api_for(personas["process_engineer"]).post(URL, {"file": "x"}, format="json")
    assert reply.status_code == 415
    assert set(reply.json()) >= {"error", "detail"}


def test_api_is_for_process_engineers(floor, personas):
    reply = api_for(personas["operator"]).post(
        URL, {"file": upload(design_xml())}, format="multipart"
    )
    assert reply.status_code == 403
    assert "process engineer" in reply.json()["detail"]


def test_api_imports_each_shared_file(floor, personas, shared_files):
    client = api_for(personas["process_engineer"])
    layers = {}
    for path in sorted(shared_files.glob("*.xml")):
        with path.open("rb") as handle:
            reply = client.post(URL, {"file": handle}, format="multipart")
        assert reply.status_code == 200, (path.name, reply.content[:300])
        data = reply.json()
        assert set(data) == SHAPE
        layers[path.name] = data["spec"]["layers"]
    # Copper layer counts read from each file's Layer list (see test_real_files.py).
    assert layers == {
        "flash-4layer-rev-b.xml": 4,
        "tc11-rigidflex-buried-rev-c.xml": 6,
        "tc9-6layer-rev-c.xml": 6,
        "wifi-panel-4layer-rev-b.xml": 4,
    }


# --------------------------------------------------------------------------- command


def test_command_json_and_text(tmp_path, shared_files):
    before = counts()
    path = shared_files / "tc11-rigidflex-buried-rev-c.xml"
    code, out, _ = command("import-design", str(path), "--format", "json")
    assert code == 0
    data = json.loads(out)
    assert set(data) == SHAPE
    assert data["source"]["units"] == "INCH"
    assert data["spec"]["vias"][1] == {"from": 2, "to": 5, "kind": "buried", "drill": "mechanical"}
    code, out, _ = command("import-design", str(path), "--format", "text")
    assert code == 0
    assert "measured over mask" in out and "To fill in: ipc_class, finish" in out
    assert "L2-L5 buried mechanical" in out
    assert counts() == before


def test_command_exit_2_on_bad_files(tmp_path):
    bad = tmp_path / "drawing.xml"
    bad.write_text('<?xml version="1.0"?><drawing/>')
    code, out, err = command("import-design", str(bad), "--format", "json")
    assert code == 2 and out == ""
    body = json.loads(err)
    assert body["error"] == "invalid" and "root element is <drawing>" in body["detail"]
    code, _, err = command("import-design", str(tmp_path / "none.xml"))
    assert code == 2 and "Cannot read" in err
    old = tmp_path / "old.xml"
    old.write_text(design_xml(revision="A"))
    code, _, err = command("import-design", str(old))
    assert code == 2 and "supported revisions are B, B1, C" in err


# --------------------------------------------------------------------------- page


def test_page_shows_the_draft_with_origins_svg_and_what_to_fill(floor, personas, shared_files):
    client = page_for(personas["process_engineer"])
    assert client.get("/engineering/import-design/").status_code == 200
    with (shared_files / "wifi-panel-4layer-rev-b.xml").open("rb") as handle:
        reply = client.post("/engineering/import-design/", {"file": handle})
    assert reply.status_code == 200
    text = reply.content.decode()
    assert "Imported from wifi-panel-4layer-rev-b.xml" in text
    assert "<svg" in text and "layers to scale" in text
    assert "from the file" in text and "to fill in" in text
    assert "measured <strong>over mask</strong>" in text
    assert "6 boards" in text  # StepRepeat nx=3 ny=2
    # The editable draft carries a mark the validator refuses until it is replaced.
    assert "&quot;finish&quot;: &quot;(to fill in)&quot;" in text
    assert 'action="/engineering/preview/"' in text


def test_filled_draft_previews_and_unfilled_is_refused(floor, personas, shared_files):
    from routing import services

    with (shared_files / "flash-4layer-rev-b.xml").open("rb") as handle:
        result = services.import_design(handle, name="flash")
    client = page_for(personas["process_engineer"])
    refused = client.post("/engineering/preview/", {"spec": json.dumps(result.draft())})
    assert refused.status_code == 400
    assert "(to fill in)" in refused.content.decode()
    draft = result.draft()
    draft.update(ipc_class=2, finish="enig", profile="route", electrical_test="flying_probe")
    draft["solder_mask"]["colour"] = "green"
    preview = client.post("/engineering/preview/", {"spec": json.dumps(draft)})
    assert preview.status_code == 200
    assert "steps" in preview.content.decode()


def test_page_refuses_bad_files_and_non_engineers(floor, personas):
    client = page_for(personas["process_engineer"])
    reply = client.post("/engineering/import-design/", {"file": upload("<a/>", "a.xml")})
    assert reply.status_code == 400
    assert "root element is &lt;a&gt;" in reply.content.decode()
    assert client.post("/engineering/import-design/", {}).status_code == 400
    assert page_for(personas["operator"]).get("/engineering/import-design/").status_code == 403


# --------------------------------------------------------------------------- authoring form


def _form_post(state, **extra):
    post = dict(state.values)
    post["hard_gold_fingers"] = "on" if state.values["hard_gold_fingers"] else ""
    for prefix, rows in (("stackup", state.stackup), ("vias", state.vias)):
        for i, row in enumerate(rows):
            for k, v in row.items():
                post[f"{prefix}-{i}-{k}"] = v
    post["imported"] = ",".join(sorted(state.imported))
    post["to_fill"] = ",".join(state.to_fill)
    post.update(extra)
    return post


def test_import_into_a_part_revision_fills_its_form_then_drafts_and_releases(
    floor, personas, shared_files
):
    from routing import services, spec_form
    from tests.factories import PIN, make_part_revision

    engineer = personas["process_engineer"]
    pr = make_part_revision()
    PartRevision.objects.filter(pk=pr.pk).update(build_spec={})
    client = page_for(engineer)
    path = shared_files / "tc11-rigidflex-buried-rev-c.xml"
    with path.open("rb") as handle:
        page = client.post(
            "/engineering/import-design/", {"file": handle, "part_revision": str(pr.pk)}
        )
    assert page.status_code == 200
    text = page.content.decode()
    # The part revision's authoring form, pre-filled, imported fields and to-fill marked.
    assert f'action="/engineering/part-revisions/{pr.pk}/spec/"' in text
    assert "imported-tag" in text and "to fill in" in text
    assert (
        'name="to_fill" value="ipc_class,finish,solder_mask.colour,profile,electrical_test"' in text
    )
    assert "Imported from tc11-rigidflex-buried-rev-c.xml" in text and "<svg" in text
    with path.open("rb") as handle:
        result = services.import_design(handle)
    state = spec_form.form_values(result.spec, imported=result.from_file)
    state.to_fill = list(result.to_fill)
    # Finish and class filled, mask colour left empty: refused, nothing saved (the
    # validator alone would have defaulted the colour).
    partly = _form_post(
        state,
        ipc_class="3",
        finish="enig",
        profile="route",
        electrical_test="flying_probe",
        action="save",
    )
    refused = client.post(f"/engineering/part-revisions/{pr.pk}/spec/", partly)
    assert refused.status_code == 400
    assert "Still to fill in" in refused.content.decode()
    assert "solder_mask.colour" in refused.content.decode()
    pr.refresh_from_db()
    assert pr.build_spec == {}
    live = client.post("/engineering/spec-form/preview/", partly)
    assert "Still to fill in" in live.content.decode()
    # Everything filled: saved and drafted in one click, then released with the PIN.
    filled = {**partly, "solder_mask_colour": "green", "action": "draft", "reason": "from design"}
    drafted = client.post(f"/engineering/part-revisions/{pr.pk}/spec/", filled)
    assert drafted.status_code == 302, drafted.content.decode()[:2000]
    pr.refresh_from_db()
    # From the file: 6 copper layers, 0.95 mm over mask, the buried L2-L5 span.
    assert pr.build_spec["layers"] == 6 and pr.build_spec["board_thickness_mm"] == 0.95
    assert {"from": 2, "to": 5, "kind": "buried", "drill": "mechanical"} in pr.build_spec["vias"]
    revision = RoutingRevision.objects.get(part_revision=pr)
    released = client.post(f"/engineering/revisions/{revision.pk}/release/", {"pin": PIN})
    assert released.status_code == 302
    revision.refresh_from_db()
    assert revision.status == "released"
    # Two press cycles: the buried L2-L5 span is drilled in its own sub-assembly.
    assert revision.built.get("lamination_cycles") == 2


def test_import_into_an_unknown_part_revision_is_refused(floor, personas):
    client = page_for(personas["process_engineer"])
    reply = client.post(
        "/engineering/import-design/", {"file": upload(design_xml()), "part_revision": "999999"}
    )
    assert reply.status_code == 400 and "No part revision" in reply.content.decode()
