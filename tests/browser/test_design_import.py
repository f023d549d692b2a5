"""A process engineer imports each shared IPC-2581 file at a desk (1366x768), fills in
what the file does not state, and previews the routing.

The four files are real exporters' output, read in place from the shared data directory
(never copied here); layer counts are those read from each file's Layer list (see
tests/design_import/test_real_files.py for where in each file).
"""

from __future__ import annotations

import json

import pytest

from tests.browser.test_board_live import ARTIFACTS, board_browser, signed_in_page  # noqa: F401
from tests.design_import.conftest import shared_files  # noqa: F401

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

FILES = {
    "tc9-6layer-rev-c.xml": 6,
    "tc11-rigidflex-buried-rev-c.xml": 6,
    "flash-4layer-rev-b.xml": 4,
    "wifi-panel-4layer-rev-b.xml": 4,
}


@pytest.mark.parametrize("name", sorted(FILES))
def test_import_fill_in_and_preview(board_browser, live_server, floor, shared_files, name):  # noqa: F811
    page = signed_in_page(
        board_browser, live_server, floor.personas["process_engineer"].user, 1366, 768
    )
    page.goto(f"{live_server.url}/engineering/")
    page.click("text=Import a design file (IPC-2581)")
    page.wait_for_selector("h1:has-text('Import a design file')")
    page.set_input_files("#design-file", str(shared_files / name))
    page.click("form.upload button")
    page.wait_for_selector(f"h2:has-text('Imported from {name}')")
    ARTIFACTS.mkdir(exist_ok=True)
    stem = name.removesuffix(".xml")
    page.screenshot(path=str(ARTIFACTS / f"import-{stem}-1366x768.png"), full_page=True)
    # The cross-section is drawn, with one bar per via span, and is not wider than its column.
    svg = page.locator("figure.cross-section svg")
    assert svg.count() == 1
    box = svg.bounding_box()
    figure = page.locator("figure.cross-section").bounding_box()
    assert box is not None and figure is not None and box["width"] <= figure["width"] + 1
    assert page.locator("figure.cross-section svg rect[opacity]").count() >= 1
    assert page.locator("tr.to_fill").count() >= 4
    draft = json.loads(page.input_value("#spec"))
    assert draft["layers"] == FILES[name]
    assert draft["finish"] == "(to fill in)"
    # Preview before filling in: refused, each unfilled field named with what is allowed.
    page.click("button:has-text('Preview')")
    page.wait_for_selector("#preview-panel .refusal")
    refusal = page.inner_text("#preview-panel")
    assert "finish" in refusal and "enig" in refusal
    # Fill in finish, class, mask colour, profile and test; the preview shows the routing.
    draft.update(ipc_class=2, finish="enig", profile="route", electrical_test="flying_probe")
    draft["solder_mask"]["colour"] = "green"
    page.fill("#spec", json.dumps(draft, indent=2))
    page.click("button:has-text('Preview')")
    page.wait_for_selector("#preview-panel ol.steps")
    page.screenshot(path=str(ARTIFACTS / f"import-{stem}-previewed-1366x768.png"), full_page=True)


@pytest.mark.parametrize("name", sorted(FILES))
def test_import_into_the_authoring_form(board_browser, live_server, floor, shared_files, name):  # noqa: F811
    from shopfloor.plant.models import PartRevision
    from tests.factories import make_part_revision

    pr = make_part_revision(number=f"DI-{FILES[name]}-{len(name)}")
    PartRevision.objects.filter(pk=pr.pk).update(build_spec={})
    page = signed_in_page(
        board_browser, live_server, floor.personas["process_engineer"].user, 1366, 768
    )
    page.goto(f"{live_server.url}/engineering/part-revisions/{pr.pk}/spec/")
    page.click("text=Fill in from a design file (IPC-2581)")
    page.wait_for_selector("h1:has-text('Import a design file')")
    assert page.input_value("#part-revision") == str(pr.pk)
    page.set_input_files("#design-file", str(shared_files / name))
    page.click("form.upload button")
    page.wait_for_selector(f"h2:has-text('Imported from {name}')")
    assert page.input_value("select[name=layers]") == str(FILES[name])
    assert page.locator("label:has(span.tag.fill)").count() >= 5
    stem = name.removesuffix(".xml")
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / f"import-form-{stem}-1366x768.png"), full_page=True)
    # Fill in what the file does not state; the live preview then shows the routing.
    page.select_option("select[name=ipc_class]", "2")
    page.select_option("select[name=finish]", "enig")
    page.select_option("select[name=solder_mask_colour]", "green")
    page.select_option("select[name=profile]", "route")
    page.select_option("select[name=electrical_test]", "flying_probe")
    page.wait_for_selector("#spec-preview ol.steps", timeout=15000)
    page.screenshot(path=str(ARTIFACTS / f"import-form-{stem}-filled-1366x768.png"), full_page=True)
    page.click("button[value=save]")
    page.wait_for_load_state()
    pr.refresh_from_db()
    assert pr.build_spec["layers"] == FILES[name] and pr.build_spec["finish"] == "enig"
