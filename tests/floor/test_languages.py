"""Languages on the tablet: every page in each shipped language, checked against the
catalogue; the person's language is a profile setting; numbers and dates follow it.

Outside facts used: Spanish writes a decimal comma and dates day/month/year (CLDR's
"es" locale data, as Django ships it in django/conf/locale/es/formats.py); the .po and
.mo formats are GNU gettext's (read here with the standard library's `gettext` module,
which is independent of Django's loader).
"""

from __future__ import annotations

import ast
import gettext as stdlib_gettext
import html
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from django.conf import settings
from django.test import Client
from django.utils import timezone
from django.utils.translation.template import templatize

from shopfloor.floor.models import LotStep, Reading
from shopfloor.plant.models import Person
from tests import helpers

pytestmark = pytest.mark.django_db

ROOT = Path(settings.BASE_DIR)
TABLET_TEMPLATES = [
    *sorted((ROOT / "templates" / "floor").glob("*.html")),
    ROOT / "templates" / "base.html",
]
OTHER_LANGUAGES = [code for code, _ in settings.LANGUAGES if code != settings.LANGUAGE_CODE]
_CALL = re.compile(r"(n?gettext)\((u'(?:[^'\\]|\\.)*')(?:, (u'(?:[^'\\]|\\.)*'))?")


def template_msgids(path: Path) -> set[str]:
    """Every msgid a template sends to the catalogue (Django's own template lexer)."""
    code = templatize(path.read_text(encoding="utf-8"), origin=str(path))
    found: set[str] = set()
    for _, one, other in _CALL.findall(code):
        found.add(ast.literal_eval(one))
        if other:
            found.add(ast.literal_eval(other))
    return found


def catalogue(language: str) -> stdlib_gettext.GNUTranslations:
    mo = ROOT / "locale" / language / "LC_MESSAGES" / "django.mo"
    with mo.open("rb") as f:
        return stdlib_gettext.GNUTranslations(f)


def po_entries(language: str, *, plurals: bool = True) -> dict[str, str]:
    """msgid -> msgstr from the .po file, read without Django or gettext; a plural
    entry gives msgid -> first form and (with `plurals`) msgid_plural -> second form."""
    text = (ROOT / "locale" / language / "LC_MESSAGES" / "django.po").read_text("utf-8")
    entries: dict[str, str] = {}
    for block in text.split("\n\n"):
        fields: dict[str, str] = {}
        key = None
        for line in block.splitlines():
            m = re.match(r'^(msgid|msgid_plural|msgstr|msgstr\[0\]|msgstr\[1\]) (".*")$', line)
            if m:
                key = m.group(1)
                fields[key] = ast.literal_eval(m.group(2))
            elif line.startswith('"') and key:
                fields[key] += ast.literal_eval(line)
            elif not line.startswith('"'):
                key = None if not line.startswith("msg") else key
        if fields.get("msgid"):
            entries[fields["msgid"]] = fields.get("msgstr", fields.get("msgstr[0]", ""))
        if plurals and fields.get("msgid_plural"):
            entries[fields["msgid_plural"]] = fields.get("msgstr[1]", "")
    return entries


# --- the catalogue --------------------------------------------------------------------


@pytest.mark.parametrize("language", OTHER_LANGUAGES)
def test_every_tablet_msgid_has_a_translation(language):
    entries = po_entries(language)
    used = set().union(*(template_msgids(p) for p in TABLET_TEMPLATES))
    assert len(used) > 150
    missing = sorted(m for m in used if not entries.get(m))
    assert not missing, f"run makemessages and translate: {missing[:10]}"


@pytest.mark.parametrize("language", OTHER_LANGUAGES)
def test_compiled_catalogue_matches_the_po_file(language):
    """The committed .mo is the .po compiled (a fresh clone needs no compile step)."""
    mo = catalogue(language)
    singular = po_entries(language, plurals=False)
    stale = [m for m, s in singular.items() if s and mo.gettext(m) != s]
    text = (ROOT / "locale" / language / "LC_MESSAGES" / "django.po").read_text("utf-8")
    pairs = re.findall(r'^msgid (".*")\nmsgid_plural (".*")$', text, re.M)
    assert pairs
    for one, other in pairs:
        one, other = ast.literal_eval(one), ast.literal_eval(other)
        if mo.ngettext(one, other, 5) == other:
            stale.append(other)
    assert not stale, f"run: msgfmt -o locale/{language}/LC_MESSAGES/django.mo ...po; {stale[:5]}"


# --- rendered pages -------------------------------------------------------------------


def visible_text(body: str) -> str:
    """What a person reads: tags, scripts and styles removed, entities decoded. Text the
    plant wrote (step instructions, service refusals) is data and is cut out by class."""
    body = re.sub(r"<(script|style)\b.*?</\1>", " ", body, flags=re.S)
    body = re.sub(r'<div class="instructions">.*?</div>', " ", body, flags=re.S)
    return html.unescape(re.sub(r"<[^>]+>", " ", body))


def _pattern(msgid: str) -> re.Pattern[str]:
    parts = re.split(r"%\(\w+\)s|\{\w+\}", msgid)
    # a placeholder stands for a short value: bounded, so a page with many near-matches
    # cannot make the search backtrack without end
    body = r".{1,80}?".join(re.escape(p) for p in parts)
    return re.compile(rf"(?<![\w-]){body}(?![\w-])")


def english_left(body: str, language: str) -> list[str]:
    """English source strings with a different translation that still show on the page.
    Single words under 5 letters ('no', 'Lot', 'rev') are skipped: they occur inside
    codes and names."""
    text = " ".join(visible_text(body).split())
    left = []
    for msgid, msgstr in po_entries(language).items():
        if not msgstr or msgstr == msgid or "<code>" in msgid:
            continue
        if " " not in msgid and len(msgid) < 5:
            continue
        if _pattern(msgid).search(text) and not _pattern(msgstr).search(text):
            left.append(msgid)
    return left


def _client_for(person: Person, language: str) -> Client:
    Person.objects.filter(pk=person.pk).update(language=language)
    c = Client()
    c.force_login(person.user)
    return c


def _pages(floor, client: Client, step: LotStep) -> dict[str, str]:
    wc = step.work_center
    pages = {
        "work centers": client.get("/floor/"),
        "queue": client.get(f"/floor/centers/{wc.code}/"),
        "lot": client.get(f"/floor/lots/{floor.lot.code}/"),
        "scan refused": client.get("/floor/scan/?code=NO-SUCH-LOT"),
        "upload": client.get("/floor/readings/upload/"),
        "language": client.get("/floor/language/"),
    }
    return {name: r.content.decode() for name, r in pages.items() if r.status_code < 500}


@pytest.mark.parametrize("language", OTHER_LANGUAGES)
def test_every_tablet_page_renders_without_english_left(floor, language, parked_outbox):
    operator = floor.personas["operator"]
    supervisor = floor.personas["supervisor"]
    step = helpers.advance_to(floor.lot, helpers.measured())
    client = _client_for(operator, language)
    pages = _pages(floor, client, step)
    assert (
        client.post(f"/floor/steps/{step.pk}/start/", {"idempotency_key": "i18n-s"}).status_code
        == 302
    )
    started = client.get(f"/floor/lots/{floor.lot.code}/").content.decode()
    m = next(x for x in step.plan if x.get("min") is not None and not x.get("attribute"))
    recorded = client.post(
        f"/floor/steps/{step.pk}/readings/",
        {
            "quantity": m["quantity"],
            "sample_index": 1,
            "value": str(helpers.in_window_value(m)).replace(".", ","),
            "unit": m["unit"],
            "idempotency_key": "i18n-r1",
        },
        HTTP_HX_REQUEST="true",
    )
    assert recorded.status_code == 201, recorded.content.decode()
    confirm = client.post(
        f"/floor/steps/{step.pk}/readings/",
        {
            "quantity": m["quantity"],
            "sample_index": 2,
            "value": str(helpers.out_of_window_value(m)).replace(".", ","),
            "unit": m["unit"],
            "idempotency_key": "i18n-r2",
        },
        HTTP_HX_REQUEST="true",
    )
    assert confirm.status_code == 409
    pages.update(
        {
            "lot started": started,
            "lot with a reading": client.get(f"/floor/lots/{floor.lot.code}/").content.decode(),
            "confirm row": confirm.content.decode(),
        }
    )
    Person.objects.filter(pk=operator.pk).update(locked_at=timezone.now(), pin_failures=5)
    pages["locked badges"] = (
        _client_for(supervisor, language).get("/floor/people/locked/").content.decode()
    )
    pages["login"] = Client(HTTP_ACCEPT_LANGUAGE=language).get("/floor/login/").content.decode()
    assert len(pages) == 11
    for name, body in pages.items():
        assert f'lang="{language}"' in body or name == "confirm row", name
        left = english_left(body, language)
        assert not left, f"{name}: English left on the page: {left}"


def test_spanish_page_is_spanish_with_its_number_and_date_formats(floor, parked_outbox):
    step = helpers.advance_to(floor.lot, helpers.measured())
    client = _client_for(floor.personas["operator"], "es")
    client.post(f"/floor/steps/{step.pk}/start/", {"idempotency_key": "es-s"})
    body = client.get(f"/floor/lots/{floor.lot.code}/").content.decode()
    assert "Mediciones" in body and "Firmar paso" in body and "Ventana:" in body
    assert "Measurements" not in body and "Sign off step" not in body
    assert 'lang="es"' in body and "Content-Language" in client.get("/floor/").headers
    due = floor.job.due_date
    assert f"entrega {due:%d/%m/%Y}" in body  # day/month/year in Spanish
    # trade terms stay as the trade writes them
    assert "Clase IPC" in body
    # a decimal comma typed in Spanish is read as the number meant
    m = next(x for x in step.plan if x.get("min") is not None and not x.get("attribute"))
    value = helpers.in_window_value(m)
    r = client.post(
        f"/floor/steps/{step.pk}/readings/",
        {
            "quantity": m["quantity"],
            "sample_index": 1,
            "value": f"{value:.1f}".replace(".", ","),
            "unit": m["unit"],
            "idempotency_key": "es-r",
        },
        HTTP_HX_REQUEST="true",
    )
    assert r.status_code == 201
    stored = Reading.objects.get(lot_step=step, sample_index=1, quantity=m["quantity"])
    assert stored.value == pytest.approx(round(value, 1))


def test_english_person_keeps_english_and_a_decimal_point(floor, client):
    client.force_login(floor.personas["operator"].user)
    body = client.get("/floor/", HTTP_ACCEPT_LANGUAGE="es").content.decode()
    # no personal choice: the browser's language is used ...
    assert "Elija su centro de trabajo" in body
    Person.objects.filter(pk=floor.personas["operator"].pk).update(language="en")
    body = client.get("/floor/", HTTP_ACCEPT_LANGUAGE="es").content.decode()
    # ... and the person's own choice wins over it
    assert "Pick your work center" in body and 'lang="en"' in body


def test_person_sets_their_language_on_the_tablet(floor, client):
    person = floor.personas["operator"]
    client.force_login(person.user)
    assert client.post("/floor/language/", {"language": "es"}).status_code == 302
    person.refresh_from_db()
    assert person.language == "es"
    assert "Centros de trabajo" in client.get("/floor/").content.decode()
    r = client.post("/floor/language/", {"language": "xx"})
    assert r.status_code == 400 and "Unknown language" in r.content.decode()
    person.refresh_from_db()
    assert person.language == "es"  # nothing saved


def test_language_is_editable_in_the_admin(admin_client, floor):
    person = floor.personas["operator"]
    page = admin_client.get(f"/admin/plant/person/{person.pk}/change/").content.decode()
    assert 'name="language"' in page and '<option value="es"' in page


def test_desk_pages_stay_in_the_site_language(floor, client):
    Person.objects.filter(pk=floor.personas["quality_engineer"].pk).update(language="es")
    client.force_login(floor.personas["quality_engineer"].user)
    r = client.get("/quality/")
    assert r.status_code == 200 and 'lang="en"' in r.content.decode()


@pytest.mark.skipif(not shutil.which("pdftotext"), reason="poppler-utils not installed")
def test_traveller_prints_in_the_persons_language(floor, tmp_path):
    """The PDF's text, extracted by an independent tool (poppler's pdftotext)."""
    client = _client_for(floor.personas["operator"], "es")
    r = client.get(f"/floor/lots/{floor.lot.code}/traveller.pdf")
    assert r.status_code == 200
    pdf = tmp_path / "t.pdf"
    pdf.write_bytes(r.content)
    text = subprocess.run(
        ["pdftotext", "-layout", str(pdf), "-"], capture_output=True, text=True, check=True
    ).stdout
    assert "Viajero — lote" in text and "Órdenes" in text and "Ruta" in text
    assert f"{floor.job.due_date:%d/%m/%Y}" in text
    assert "Realizado por" in text and "Performed by" not in text
    assert "Traveller — lot" not in text and "Parameters:" not in text
    assert "PELIGRO:" in text  # hazard notes printed in Spanish too
