"""ONE table: every API endpoint, page and state-changing POST × every kind of caller ->
allowed or refused.

"Allowed" means the request got past authentication and authorisation (any reply but
401, 403, or a redirect to the login page); a 400/404/409 from the use case still counts
as allowed. Every cell is decided, so both unexpected allows (a security bug) and
unexpected refusals (a broken page) fail. A row whose URL does not resolve fails, and
so does a URL pattern with no row (`test_every_url_pattern_has_a_row`; the few patterns
that are not shop-floor pages or endpoints are listed in NOT_IN_MATRIX with the reason).

The decisions: operators work and view at their own work centers; supervisors run the
floor (any work center, queue order, queue-time warnings, badge unlocks); quality
engineers disposition NCRs and manage SPC limits; process engineers read (and release
routings); planners read, and enter, release and make up jobs; admins do everything
except the quality engineer's e-signed decisions; instruments only post readings at
their own work center; lab technicians read like process engineers and work the baths
(analyses, additions, dumps; an engineer confirms additions; quality, supervisors and
admins hold the lots a bad bath touched); anonymous callers nothing; an operator of
another work center may not work a lot at a work center they are not assigned to. Sources:
shopfloor/access.py, shopfloor/floor/permissions.py and the services (common
practice for controlled documents and material review: only the owning function releases
or dispositions).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import pytest
from django.contrib.auth.models import User
from django.test import Client
from django.urls import URLPattern, URLResolver, get_resolver, resolve
from django.urls.exceptions import Resolver404
from django.utils import timezone
from rest_framework.test import APIClient

from shopfloor.plant.models import MaterialLot, Panel, Person, Qualification, Role, WorkCenter
from shopfloor.quality.models import Nonconformance, SeriesState
from shopfloor.quality.services import alerts
from tests import factories, helpers
from tests.factories import PIN, make_person
from tests.helpers import advance_to, issue_token

pytestmark = pytest.mark.django_db

CALLERS = (
    "operator",
    "supervisor",
    "process_engineer",
    "quality_engineer",
    "admin",
    "instrument",
    "anonymous",
    "other_operator",
    "planner",
    "superuser",
    "far_operator",
    "lab_technician",
)
LAB = "lab_technician"  # derived too: the process engineer's column unless Row.lab says
A, D = True, False  # allow, deny
# The last three columns are derived, not written in each row: a superuser outside the admin
# group is an administrator (one rule, shopfloor.access.is_admin), so it gets the admin
# column; an operator of a work center the lot never reached gets the other operator's
# column, except on rows that read this lot (Row.reads_lot), which it may not read; the
# lab technician's column comes from Row.lab (see there).
DERIVED = ("superuser", "far_operator", LAB)
PEOPLE = (A, A, A, A, A, D, D, A)  # every person with a role; no instruments, no anonymous
FLOOR_WORK = (A, A, D, D, A, D, D, D)  # work a step at its work center
SUP_ADMIN = (D, A, D, D, A, D, D, D)  # run the floor: reorder, release, unlock
QUALITY = (D, D, D, A, D, D, D, D)  # disposition NCRs, set SPC limits
ENGINEERING = (D, D, A, D, A, D, D, D)  # import design files (process engineering's tool)
PLANNER = (D, D, D, D, A, D, D, D, A)  # enter and release jobs (planner column last)
READERS = (A, A, A, A, A, D, D, A, A)  # every person with a role, planner included
PLAN = (D, A, A, D, A, D, D, D, A)  # quote ship dates, ask for a forecast run
CERT_READERS = (D, A, D, A, A, D, D, D, A)  # shipping pages, certificates: planner, QE, sup


@dataclass(frozen=True)
class Row:
    method: str
    url: Callable[[dict[str, Any]], str]
    # In CALLERS order. A row of 8 leaves out the planner, who then gets what a process
    # engineer and a quality engineer both get: every read, none of their decisions.
    expect: tuple[bool, ...]
    body: Callable[[dict[str, Any]], dict[str, Any]] | None = None
    api: bool = True
    owned: bool = True  # every row is decided: unexpected allows and refusals both fail
    reads_lot: bool = False  # shows the matrix lot (or its NCR/series): out of a far scope
    # The lab technician's cell. None: a GET gets the process engineer's cell (both read
    # everything), any other method is refused (the lab changes nothing outside /lab/);
    # rows where that is not so spell it out.
    lab: bool | None = None

    def expected(self) -> tuple[bool, ...]:
        written = self.expect
        if len(written) == len(CALLERS) - len(DERIVED) - 1:
            written = (*written, written[2] and written[3])  # the planner's derived cell
        by_caller = dict(zip(CALLERS[: -len(DERIVED)], written, strict=True))
        far = False if self.reads_lot else by_caller["other_operator"]
        lab = self.lab
        if lab is None:
            lab = by_caller["process_engineer"] if self.method == "GET" else False
        return (*written, by_caller["admin"], far, lab)


def _reading(ctx):
    # The first allowed caller records sample 1; later allowed callers get 409 (still allowed).
    return {
        "lot": ctx["lot"].code,
        "quantity": "hole_wall_copper",
        "value": 22,
        "unit": "um",
        "sample_index": 1,
    }


ROWS: dict[str, Row] = {
    # --- API ---------------------------------------------------- op sup pe qe adm ins ano oth
    "GET lot status": Row(
        "GET",
        lambda c: f"/api/v1/lots/{c['lot'].code}/",
        (A, A, A, A, A, D, D, A),
        reads_lot=True,
    ),
    "GET lot windows": Row(
        "GET",
        lambda c: f"/api/v1/lots/{c['lot'].code}/windows/",
        (A, A, A, A, A, D, D, A),
        reads_lot=True,
    ),
    "POST routing preview": Row(
        "POST",
        lambda c: "/api/v1/routing/preview/",
        (A, A, A, A, A, D, D, A),
        body=lambda c: c["spec"],
        lab=A,  # a preview changes nothing
    ),
    "POST routing import design": Row(
        "POST",
        lambda c: "/api/v1/routing/import-design/",
        ENGINEERING,
        body=lambda c: {},
    ),
    "POST planning quote": Row(
        "POST",
        lambda c: "/api/v1/planning/quote/",
        PLAN,
        body=lambda c: {"spec": c["spec"], "quantity": 10},
    ),
    "GET quote page": Row("GET", lambda c: "/planning/quote/", PLAN, api=False, lab=D),
    "POST quote page": Row(
        "POST",
        lambda c: "/planning/quote/",
        PLAN,
        api=False,
        body=lambda c: {"spec": "{}", "quantity": "10"},
    ),
    "POST forecast now": Row(
        "POST", lambda c: "/planning/forecast/run/", PLAN, api=False, body=lambda c: {}
    ),
    "POST reading": Row(
        "POST", lambda c: "/api/v1/readings/", (A, A, D, D, A, A, D, D), body=_reading
    ),
    # The batch endpoint lets every floor role and instrument in; the work-center rule is
    # applied per item (the other operator's items come back refused, status 200), which
    # tests/api/test_readings_batch.py checks item by item.
    "POST readings batch": Row(
        "POST",
        lambda c: "/api/v1/readings/batch/",
        (A, A, D, D, A, A, D, A),
        body=lambda c: {"items": [{**_reading(c), "sample_key": "matrix-1"}]},
    ),
    "POST reading correction": Row(
        "POST",
        lambda c: f"/api/v1/readings/{c['reading'].pk}/correct/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {"value": 23, "unit": "um", "reason": "re-measured"},
    ),
    "POST step pause": Row(
        "POST",
        lambda c: f"/api/v1/steps/{c['step'].pk}/pause/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {},
    ),
    "POST step start": Row(
        "POST",
        lambda c: f"/api/v1/steps/{c['step'].pk}/start/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {},
    ),
    "POST step complete": Row(
        "POST",
        lambda c: f"/api/v1/steps/{c['step'].pk}/complete/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {"pin": PIN},
    ),
    "POST step material": Row(
        "POST",
        lambda c: f"/api/v1/steps/{c['step'].pk}/materials/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {"material_lot": "NO-SUCH-LOT"},
    ),
    "POST step scrap": Row(
        "POST",
        lambda c: f"/api/v1/steps/{c['step'].pk}/scrap/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {"panel": "NO-SUCH-PANEL", "reason": "short"},
    ),
    "POST step accepted": Row(
        "POST",
        lambda c: f"/api/v1/steps/{c['step'].pk}/accepted/",
        (A, A, D, D, A, D, D, D),
        body=lambda c: {"accepted": {c["job"].number: 1}},
    ),
    "POST NCR disposition (API)": Row(
        "POST",
        lambda c: f"/api/v1/ncrs/{c['ncr'].number}/disposition/",
        QUALITY,
        body=lambda c: {
            "disposition": "use_as_is",
            "root_cause": "nope",
            "corrective_action": "matrix",
            "note": "matrix",
            "pin": "0000",
        },
    ),
    # Shipping: planners (and administrators) ship; certificates are read by the planner,
    # quality and supervisors.
    "POST shipment": Row(
        "POST",
        lambda c: "/api/v1/shipments/",
        PLANNER,
        body=lambda c: {"job": c["job"].number, "quantity": 1, "lots": [c["lot"].code]},
    ),
    "GET certificate PDF (API)": Row(
        "GET", lambda c: "/api/v1/certificates/COC-000000/pdf/", CERT_READERS
    ),
    # --- engineering pages -------------------------------------- op sup pe qe adm ins ano oth
    "GET engineering index": Row(
        "GET", lambda c: "/engineering/", (A, A, A, A, A, D, D, A), api=False
    ),
    "GET engineering preview": Row(
        "GET", lambda c: "/engineering/preview/", (A, A, A, A, A, D, D, A), api=False
    ),
    "POST engineering preview": Row(
        "POST",
        lambda c: "/engineering/preview/",
        (A, A, A, A, A, D, D, A),
        api=False,
        body=lambda c: {"spec": "{}"},
        lab=A,
    ),
    "GET engineering import design": Row(
        "GET", lambda c: "/engineering/import-design/", ENGINEERING, api=False, lab=D
    ),
    "POST engineering import design": Row(
        "POST", lambda c: "/engineering/import-design/", ENGINEERING, api=False, body=lambda c: {}
    ),
    "GET routing revision": Row(
        "GET",
        lambda c: f"/engineering/revisions/{c['routing'].pk}/",
        (A, A, A, A, A, D, D, A),
        api=False,
    ),
    "POST create draft": Row(
        "POST",
        lambda c: f"/engineering/part-revisions/{c['routing'].part_revision_id}/draft/",
        (D, D, A, D, A, D, D, D),
        api=False,
        lab=D,
        body=lambda c: {"reason": "matrix"},
    ),
    "POST release": Row(
        "POST",
        lambda c: f"/engineering/revisions/{c['routing'].pk}/release/",
        (D, D, A, D, A, D, D, D),
        api=False,
        lab=D,
        body=lambda c: {"pin": PIN},
    ),
    "POST move lot to revision": Row(
        "POST",
        lambda c: f"/engineering/revisions/{c['routing'].pk}/move-lot/",
        (D, D, A, D, A, D, D, D),
        api=False,
        lab=D,
        body=lambda c: {"lot": c["lot"].pk, "reason": "matrix"},
    ),
    # --- floor tablet pages ------------------------------------- op sup pe qe adm ins ano oth
    # Every person may open the start page, scan and view a lot's traveller (what the paper
    # traveller shows); a work center's queue is shown to the people linked to it; working
    # a step needs the work center (start/complete: qualification there; record/correct/
    # pause: assignment there; supervisors and admins anywhere).
    "GET floor work centers": Row("GET", lambda c: "/floor/", PEOPLE, api=False),
    # a person's own language for the tablet and the traveller: every person, for themself
    "GET floor language": Row("GET", lambda c: "/floor/language/", PEOPLE, api=False),
    "POST floor language": Row(
        "POST",
        lambda c: "/floor/language/",
        PEOPLE,
        api=False,
        lab=A,  # the lab technician is a person with a tablet too
        body=lambda c: {"language": "es"},
    ),
    "GET floor queue": Row(
        "GET",
        lambda c: f"/floor/centers/{c['step'].work_center.code}/",
        (A, A, D, D, D, D, D, D),  # admin: not linked to the center; the board shows all
        api=False,
    ),
    "GET floor scan": Row("GET", lambda c: f"/floor/scan/?code={c['lot'].code}", PEOPLE, api=False),
    "GET floor lot page": Row(
        "GET", lambda c: f"/floor/lots/{c['lot'].code}/", PEOPLE, api=False, reads_lot=True
    ),
    "GET traveller PDF": Row(
        "GET",
        lambda c: f"/floor/lots/{c['lot'].code}/traveller.pdf",
        PEOPLE,
        api=False,
        reads_lot=True,
    ),
    "POST tablet record reading": Row(
        "POST",
        lambda c: f"/floor/steps/{c['step'].pk}/readings/",
        FLOOR_WORK,
        api=False,
        body=lambda c: {**_reading(c), "value": "22", "sample_index": "1"},
    ),
    # A gauge file: floor roles open the page; the work-center rule applies per line
    # (tests/floor/test_upload.py), so the other center's operator gets the page too.
    "GET gauge file upload": Row(
        "GET", lambda c: "/floor/readings/upload/", (A, A, D, D, A, D, D, A), api=False
    ),
    "POST gauge file upload": Row(
        "POST", lambda c: "/floor/readings/upload/", (A, A, D, D, A, D, D, A), api=False
    ),
    "POST tablet correct reading": Row(
        "POST",
        lambda c: f"/floor/readings/{c['tablet_reading'].pk}/correct/",
        FLOOR_WORK,
        api=False,
        body=lambda c: {"value": "41", "unit": "um", "reason": "re-measured"},
    ),
    "POST tablet start": Row(
        "POST", lambda c: f"/floor/steps/{c['step'].pk}/start/", FLOOR_WORK, api=False
    ),
    "POST tablet complete": Row(
        "POST",
        lambda c: f"/floor/steps/{c['step'].pk}/complete/",
        FLOOR_WORK,
        api=False,
        body=lambda c: {"pin": PIN, "meaning": "performed_by"},
    ),
    "POST tablet pause": Row(
        "POST",
        lambda c: f"/floor/steps/{c['step'].pk}/pause/",
        FLOOR_WORK,
        api=False,
        body=lambda c: {"reason": "matrix"},
    ),
    "POST tablet material": Row(
        "POST",
        lambda c: f"/floor/steps/{c['step'].pk}/materials/",
        FLOOR_WORK,
        api=False,
        body=lambda c: {"code": "NO-SUCH-LOT"},
    ),
    "POST tablet scrap": Row(
        "POST",
        lambda c: f"/floor/steps/{c['step'].pk}/scrap/",
        FLOOR_WORK,
        api=False,
        body=lambda c: {"panel": "NO-SUCH-PANEL", "reason": "short"},
    ),
    "POST tablet accepted": Row(
        "POST",
        lambda c: f"/floor/steps/{c['step'].pk}/accepted/",
        FLOOR_WORK,
        api=False,
        body=lambda c: {f"accepted-{c['job'].number}": "1"},
    ),
    # The scan field of a lot page whose step consumes materials: an unknown code is a
    # 404 for every person (a material lot goes through the material row's rule above).
    "POST tablet scan at step": Row(
        "POST",
        lambda c: f"/floor/steps/{c['step'].pk}/scan/",
        PEOPLE,
        api=False,
        body=lambda c: {"code": "NO-SUCH-CODE"},
        lab=A,  # a lot, panel or job scan opens a page; nothing is recorded
    ),
    # The offline tablet's service worker and offline page hold no one's data.
    "GET tablet service worker": Row("GET", lambda c: "/floor/sw.js", (A,) * 8, api=False),
    "GET tablet offline page": Row("GET", lambda c: "/floor/offline/", (A,) * 8, api=False),
    "GET locked badges": Row("GET", lambda c: "/floor/people/locked/", SUP_ADMIN, api=False),
    "POST unlock badge": Row(
        "POST", lambda c: f"/floor/people/{c['locked'].pk}/unlock/", SUP_ADMIN, api=False
    ),
    # --- supervisor board --------------------------------------- op sup pe qe adm ins ano oth
    # Everyone with a role sees the board (operators: their own work centers' lots);
    # only supervisors and admins reorder queues or accept a queue-time warning.
    "GET home": Row("GET", lambda c: "/", PEOPLE, api=False),
    "GET board": Row("GET", lambda c: "/board/", PEOPLE, api=False),
    "GET board body": Row("GET", lambda c: "/board/body/", PEOPLE, api=False),
    "GET wall board": Row("GET", lambda c: "/board/wall/", PEOPLE, api=False),
    "GET wall board body": Row("GET", lambda c: "/board/wall/body/", PEOPLE, api=False),
    "POST queue move": Row(
        "POST",
        lambda c: f"/board/queue/{c['step'].work_center_id}/move/",
        SUP_ADMIN,
        api=False,
        body=lambda c: {"lot_step": str(c["step"].pk), "move": "up"},
    ),
    "POST queue-time release": Row(
        "POST",
        lambda c: f"/board/steps/{c['step'].pk}/release-queue-warning/",
        SUP_ADMIN,
        api=False,
        body=lambda c: {"reason": "matrix check"},
    ),
    # --- quality pages ------------------------------------------ op sup pe qe adm ins ano oth
    # Reads: every role; operators only lots that reached one of their work centers (the
    # other operator's centers include the lot's first step, so they may read this lot).
    # Dispositions and SPC limits: quality engineers only. Admins are refused there on
    # purpose: the e-signature says "Dispositioned by" a quality engineer (material review
    # is the quality function's decision, common practice), and the services enforce it.
    "GET quality overview": Row("GET", lambda c: "/quality/", PEOPLE, api=False),
    "GET quality search": Row(
        "GET", lambda c: f"/quality/search/?lot={c['lot'].code}", PEOPLE, api=False
    ),
    "GET quality lot": Row(
        "GET", lambda c: f"/quality/lots/{c['lot'].code}/", PEOPLE, api=False, reads_lot=True
    ),
    "GET quality lot CSV": Row(
        "GET",
        lambda c: f"/quality/lots/{c['lot'].code}/readings.csv",
        PEOPLE,
        api=False,
        reads_lot=True,
    ),
    "GET quality lot PDF": Row(
        "GET",
        lambda c: f"/quality/lots/{c['lot'].code}/record.pdf",
        PEOPLE,
        api=False,
        reads_lot=True,
    ),
    "GET quality lot JSON": Row(
        "GET",
        lambda c: f"/quality/api/lots/{c['lot'].code}/history.json",
        PEOPLE,
        api=False,
        reads_lot=True,
    ),
    "GET quality job": Row(
        "GET", lambda c: f"/quality/jobs/{c['job'].number}/", PEOPLE, api=False, reads_lot=True
    ),
    "GET quality panel": Row(
        "GET",
        lambda c: f"/quality/panels/{c['panel'].serial}/",
        PEOPLE,
        api=False,
        reads_lot=True,
    ),
    "GET quality material": Row(
        "GET", lambda c: f"/quality/materials/{c['material'].code}/", PEOPLE, api=False
    ),
    "GET quality SPC": Row("GET", lambda c: "/quality/spc/", PEOPLE, api=False),
    "GET quality SPC series": Row(  # a series of another work center is not the operator's
        "GET",
        lambda c: f"/quality/spc/{c['series'].key}/",
        (A, A, A, A, A, D, D, D),
        api=False,
        reads_lot=True,
    ),
    "POST SPC fix limits": Row(
        "POST",
        lambda c: f"/quality/spc/{c['series'].key}/limits/",
        QUALITY,
        api=False,
        body=lambda c: {"action": "fix", "centre": "45", "ucl": "55", "lcl": "35"},
    ),
    "POST SPC recompute limits": Row(
        "POST",
        lambda c: f"/quality/spc/{c['series'].key}/limits/",
        QUALITY,
        api=False,
        body=lambda c: {"action": "recompute", "start": "2020-01-01", "end": "2020-01-02"},
    ),
    "GET build spec form": Row(
        "GET",
        lambda c: f"/engineering/part-revisions/{c['routing'].part_revision_id}/spec/",
        READERS,
        api=False,
    ),
    "POST build spec form": Row(
        "POST",
        lambda c: f"/engineering/part-revisions/{c['routing'].part_revision_id}/spec/",
        ENGINEERING,
        api=False,
        body=lambda c: {"action": "save", "layers": "3"},
    ),
    "POST build spec live preview": Row(
        "POST",
        lambda c: "/engineering/spec-form/preview/",
        READERS,
        api=False,
        body=lambda c: {"layers": "4"},
        lab=A,  # a preview changes nothing
    ),
    "PUT part revision spec API": Row(
        "PUT",
        lambda c: f"/api/v1/part-revisions/{c['routing'].part_revision_id}/spec/",
        ENGINEERING,
        body=lambda c: {"layers": 3},
    ),
    "POST routing draft API": Row(
        "POST",
        lambda c: f"/api/v1/part-revisions/{c['routing'].part_revision_id}/drafts/",
        ENGINEERING,
        body=lambda c: {"reason": "matrix"},
    ),
    "POST routing release API": Row(
        "POST",
        lambda c: f"/api/v1/routing-revisions/{c['routing'].pk}/release/",
        ENGINEERING,
        body=lambda c: {"pin": PIN},  # already released: 409 once past the role check
    ),
    # --- jobs (planner) ------------------------------------------ op sup pe qe adm ins ano oth pla
    "GET jobs API": Row("GET", lambda c: "/api/v1/jobs/?status=released", READERS),
    "GET job API": Row("GET", lambda c: f"/api/v1/jobs/{c['job'].number}/", READERS),
    "POST job entry API": Row(
        "POST", lambda c: "/api/v1/jobs/", PLANNER, body=lambda c: c["entry"]
    ),
    "POST job release API": Row(
        "POST",
        lambda c: f"/api/v1/jobs/{c['job'].number}/release/",
        PLANNER,
        body=lambda c: {"boards_per_panel": 4},
    ),
    "POST job make-up API": Row(
        "POST", lambda c: f"/api/v1/jobs/{c['job'].number}/make-up/", PLANNER, body=lambda c: {}
    ),
    "GET jobs page": Row("GET", lambda c: "/jobs/", READERS, api=False),
    "GET job entry page": Row("GET", lambda c: "/jobs/new/", PLANNER, api=False),
    "POST job entry page": Row(
        "POST", lambda c: "/jobs/new/", PLANNER, api=False, body=lambda c: c["entry"]
    ),
    "GET job page": Row("GET", lambda c: f"/jobs/{c['job'].number}/", READERS, api=False),
    "POST job release page": Row(
        "POST",
        lambda c: f"/jobs/{c['job'].number}/release/",
        PLANNER,
        api=False,
        body=lambda c: {"boards_per_panel": "4"},
    ),
    "POST job make-up page": Row(
        "POST", lambda c: f"/jobs/{c['job'].number}/make-up/", PLANNER, api=False
    ),
    "GET lot label": Row(
        "GET",
        lambda c: f"/jobs/lots/{c['lot'].code}/label.pdf",
        READERS,
        api=False,
        reads_lot=True,
    ),
    "GET NCR page": Row(
        "GET", lambda c: f"/quality/ncrs/{c['ncr'].number}/", PEOPLE, api=False, reads_lot=True
    ),
    "POST NCR disposition": Row(
        "POST",
        lambda c: f"/quality/ncrs/{c['ncr'].number}/",
        QUALITY,
        api=False,
        body=lambda c: {"disposition": "use_as_is", "note": "matrix check", "pin": PIN},
    ),
    # --- lab (bath chemistry) -------------------------------- op sup pe qe adm ins ano oth
    # Everyone with a role reads the baths; the lab technician, process engineer and admin
    # enter analyses and tank events; only an engineer (or admin) confirms an addition;
    # quality, supervisors and admins hold exposed lots; exposed-lot lists span every
    # work center, so operators are refused them (as for other centers' lots).
    "GET lab tanks": Row("GET", lambda c: "/lab/", PEOPLE, api=False, lab=A),
    "GET lab board strip": Row("GET", lambda c: "/lab/board-strip/", PEOPLE, api=False, lab=A),
    "GET lab calculator": Row(
        "GET", lambda c: "/lab/calculator/?metal=copper&minutes=10", PEOPLE, api=False, lab=A
    ),
    "GET lab tank": Row("GET", lambda c: f"/lab/tanks/{c['tank'].code}/", PEOPLE, api=False),
    "GET lab addition": Row(
        "GET",
        lambda c: f"/lab/tanks/{c['tank'].code}/addition/?parameter=copper_sulfate",
        PEOPLE,
        api=False,
    ),
    "GET lab SPC": Row(
        "GET", lambda c: f"/lab/tanks/{c['tank'].code}/spc/copper_sulfate/", PEOPLE, api=False
    ),
    "GET lab analysis exposure": Row(
        "GET",
        lambda c: f"/lab/analyses/{c['bad_analysis'].pk}/",
        (D, A, A, A, A, D, D, D),
        api=False,
        lab=A,
    ),
    "POST lab analysis": Row(
        "POST",
        lambda c: f"/lab/tanks/{c['tank'].code}/analyses/",
        (D, D, A, D, A, D, D, D),
        api=False,
        lab=A,
        body=lambda c: {"parameter": "copper_sulfate", "value": "74", "unit": "g/L"},
    ),
    "POST lab tank event": Row(
        "POST",
        lambda c: f"/lab/tanks/{c['tank'].code}/events/",
        (D, D, A, D, A, D, D, D),
        api=False,
        lab=A,
        body=lambda c: {"kind": "counter", "amp_hours": "1000", "pin": PIN},
    ),
    "POST lab confirm addition": Row(
        "POST",
        lambda c: f"/lab/events/{c['addition'].pk}/confirm/",
        (D, D, A, D, A, D, D, D),
        api=False,
        lab=D,
        body=lambda c: {"pin": PIN},
    ),
    "POST lab hold exposed lots": Row(
        "POST",
        lambda c: f"/lab/analyses/{c['bad_analysis'].pk}/hold/",
        (D, A, D, A, A, D, D, D),
        api=False,
        lab=D,
    ),
    "GET lab plating step": Row(
        "GET", lambda c: f"/lab/plating/{c['step'].pk}/", PEOPLE, api=False, lab=A, reads_lot=True
    ),
    "POST lab plating step": Row(
        "POST",
        lambda c: f"/lab/plating/{c['step'].pk}/",
        (D, A, A, D, A, D, D, D),
        api=False,
        lab=D,
        body=lambda c: {"area_dm2": "20"},
    ),
    "GET API tanks": Row("GET", lambda c: "/api/v1/tanks/", (A, A, A, A, A, D, D, A), lab=A),
    "GET API tank": Row(
        "GET", lambda c: f"/api/v1/tanks/{c['tank'].code}/", (A, A, A, A, A, D, D, A), lab=A
    ),
    "POST API analysis": Row(
        "POST",
        lambda c: "/api/v1/analyses/",
        (D, D, A, D, A, D, D, D),
        lab=A,
        body=lambda c: {
            "tank": c["tank"].code,
            "parameter": "chloride",
            "value": "61",
            "unit": "mg/L",
        },
    ),
    "GET API analysis exposure": Row(
        "GET",
        lambda c: f"/api/v1/analyses/{c['bad_analysis'].pk}/exposure/",
        (D, A, A, A, A, D, D, D),
        lab=A,
    ),
    # --- shipping pages ----------------------------------------- op sup pe qe adm ins ano oth
    "GET shipping": Row("GET", lambda c: "/shipping/", CERT_READERS, api=False),
    "GET shipping job": Row(
        "GET", lambda c: f"/shipping/jobs/{c['job'].number}/", CERT_READERS, api=False
    ),
    "POST ship job": Row(
        "POST",
        lambda c: f"/shipping/jobs/{c['job'].number}/",
        PLANNER,
        api=False,
        body=lambda c: {"quantity": "1", "lots": [c["lot"].code]},
    ),
    "GET certificate PDF": Row(
        "GET",
        lambda c: "/shipping/certificates/COC-000000.pdf",
        CERT_READERS,
        api=False,
    ),
}


@pytest.fixture
def world(floor):
    from shopfloor.floor import services

    personas = floor.personas
    step = advance_to(floor.lot, "pattern_plate_copper", by=personas["operator"], start=True)
    admin = make_person(Role.ADMIN, "1006", "Ada Admin")
    for wc in floor.work_centers.values():
        Qualification.objects.create(
            person=admin, work_center=wc, valid_until=timezone.localdate() + dt.timedelta(days=30)
        )
    elsewhere = [wc for wc in floor.work_centers.values() if wc.pk != step.work_center_id]
    other = make_person(Role.OPERATOR, "1007", "Noor Elsewhere", work_centers=elsewhere)
    reading = services.record_reading(
        person=personas["operator"],
        lot_step_id=step.pk,
        data=services.ReadingInput(quantity="surface_copper", value=40, unit="um"),
    )
    tablet_reading = services.record_reading(
        person=personas["operator"],
        lot_step_id=step.pk,
        data=services.ReadingInput(quantity="surface_copper", value=41, unit="um", sample_index=2),
    )
    material = MaterialLot.objects.create(
        code="ML-MATRIX-1", kind=MaterialLot.Kind.CHEMISTRY, description="Acid copper bath"
    )
    step.material_lots.add(material)
    # A second lot at the same step with an out-of-window reading: alert, hold, NCR, series.
    held_lot = factories.new_lot(floor, code="LMATRIX2")
    held_step = helpers.start_at(floor, held_lot)
    bad = helpers.record(floor, held_step, "surface_copper", 70.0)
    alerts.handle_event(helpers.event_for(bad).pk)
    locked = make_person(Role.OPERATOR, "1008", "Lee Locked")
    Person.objects.filter(pk=locked.pk).update(locked_at=timezone.now(), pin_failures=5)
    from tests.factories import SPEC_4L_ENIG

    # A superuser outside every group (the one "is admin" rule must treat it as admin), and
    # an operator of a work center this routing never visits (reads none of its lots).
    root = make_person(None, "1009", "Rory Root")
    User.objects.filter(pk=root.user_id).update(is_superuser=True, is_staff=True)
    root.user.refresh_from_db()
    for wc in floor.work_centers.values():
        Qualification.objects.create(
            person=root, work_center=wc, valid_until=timezone.localdate() + dt.timedelta(days=30)
        )
    far_center = WorkCenter.objects.create(code="WC-FAR", name="Far away bench")
    far = make_person(Role.OPERATOR, "1010", "Fen Faraway", work_centers=[far_center])
    people = {
        **personas,
        "admin": admin,
        "other_operator": other,
        "superuser": root,
        "far_operator": far,
    }
    # Bath chemistry: a lab technician, the plating line's copper tank with an
    # out-of-window analysis that exposed this lot's plating step, and an addition that
    # waits for an engineer's confirmation.
    from shopfloor.chemistry import services as chemistry
    from tests.factories import copper_tank

    tank = copper_tank()
    lab = make_person(Role.LAB_TECHNICIAN, "1011", "Lia Lab")
    people[LAB] = lab
    chemistry.record_tank_use(step, timezone.now() - dt.timedelta(minutes=5))
    bad_analysis = chemistry.record_analysis(
        person=lab,
        tank_code=tank.code,
        data=chemistry.AnalysisInput(parameter="copper_sulfate", value="50", unit="g/L"),
    )
    addition = chemistry.record_event(
        person=lab,
        tank_code=tank.code,
        kind="addition",
        pin=PIN,
        parameter="copper_sulfate",
        add_l=100,
    )
    return {
        "lot": floor.lot,
        "step": step,
        "reading": reading,
        "tablet_reading": tablet_reading,
        "routing": floor.routing,
        "spec": SPEC_4L_ENIG,
        "people": people,
        "token": issue_token("matrix-gauge", step.work_center.code),
        "job": floor.job,
        "panel": Panel.objects.filter(lot=floor.lot).order_by("serial").first(),
        "material": material,
        "ncr": Nonconformance.objects.get(lot=held_lot),
        "series": SeriesState.objects.get(quantity="surface_copper"),
        "locked": locked,
        "entry": {
            "customer": floor.job.part_revision.part.customer.code,
            "part_number": floor.job.part_revision.part.number,
            "part_revision": floor.job.part_revision.revision,
            "quantity": 10,
            "due_date": (timezone.localdate() + dt.timedelta(days=30)).isoformat(),
            "ipc_class": 2,
        },
        "tank": tank,
        "bad_analysis": bad_analysis,
        "addition": addition,
    }


def _client(caller: str, ctx: dict[str, Any], api: bool) -> Client:
    client: Client = APIClient() if api else Client()
    if caller == "instrument":
        client.defaults["HTTP_AUTHORIZATION"] = f"Token {ctx['token']}"
    elif caller != "anonymous":
        client.force_login(ctx["people"][caller].user)
    return client


def _allowed(reply: Any) -> bool:
    if reply.status_code in (401, 403):
        return False
    if reply.status_code == 302 and "/floor/login/" in reply.get("Location", ""):
        return False
    return True


def test_role_matrix(world):
    unexpected_allows: list[str] = []
    unexpected_denies: list[str] = []
    checked = 0
    for label, row in ROWS.items():
        url = row.url(world)
        try:
            resolve(url.split("?")[0])
        except Resolver404:
            raise AssertionError(f"{label}: {url} does not resolve; fix the row") from None
        for caller, expected in zip(CALLERS, row.expected(), strict=True):
            client = _client(caller, world, row.api)
            body = row.body(world) if row.body else None
            if row.method == "GET":
                reply = client.get(url)
            elif row.method == "PUT":
                reply = client.put(url, body, format="json")
            elif row.api:
                reply = client.post(url, body, format="json")
            else:
                reply = client.post(url, body or {})
            assert reply.status_code < 500, f"{label} as {caller}: {reply.status_code}"
            got = _allowed(reply)
            checked += 1
            if got and expected is False:
                unexpected_allows.append(f"{label} as {caller} -> {reply.status_code}")
            if not got and expected is True and row.owned:
                unexpected_denies.append(f"{label} as {caller} -> {reply.status_code}")
    assert checked >= 45 * len(CALLERS)
    assert unexpected_allows == [], "\n".join(unexpected_allows)
    assert unexpected_denies == [], "\n".join(unexpected_denies)


#: URL patterns without a row, each with the reason it is not a shop-floor page or
#: endpoint (prefixes: every pattern under it).
NOT_IN_MATRIX: dict[str, str] = {
    "admin/": "Django's admin site: staff accounts only, Django's own permission checks",
    "healthz": "the health check: open by design, shows no record (tests/security/test_health.py)",
    "floor/login/": "signing in: open to everyone by design (the sign-in throttle guards it)",
    "floor/logout/": "signing out: open to everyone by design (POST only)",
    "^api/v1/": "the API's JSON 404 for a path no endpoint matches: reads and changes nothing",
    "api/schema/": "the API description: signed-in only unless API_DOCS_PUBLIC "
    "(tests/security/test_logout_and_docs.py)",
    "api/docs/": "the API description's page, as api/schema/",
    "bench/": "benchmark-only endpoints, present only with BENCH_ENDPOINTS (never in production)",
    "display/theme/": "the high-contrast toggle: open to everyone by design (a device setting, "
    "on the sign-in page too); changes only the caller's own display",
}


class _AnyRecord:
    """Stands in for every record the rows' URLs name (lot, step, NCR, ...): each
    attribute, item and formatted value is '1', so every row's URL can be built without
    a database and resolved."""

    def __getattr__(self, name: str) -> _AnyRecord:
        return self

    def __getitem__(self, key: Any) -> _AnyRecord:
        return self

    def __format__(self, spec: str) -> str:
        return "1"

    def __str__(self) -> str:
        return "1"


def _routes(patterns: list[Any], prefix: str = "") -> list[str]:
    out: list[str] = []
    for p in patterns:
        if isinstance(p, URLResolver):
            out += _routes(p.url_patterns, prefix + str(p.pattern))
        elif isinstance(p, URLPattern):
            out.append(prefix + str(p.pattern))
    return out


def test_every_url_pattern_has_a_row():
    """A new page or endpoint must get its row (who may call it) before it lands."""
    ctx = _AnyRecord()
    covered: set[str] = set()
    unresolved: list[str] = []
    for label, row in ROWS.items():
        url = row.url(ctx)  # type: ignore[arg-type]
        try:
            covered.add(resolve(url.split("?")[0]).route)
        except Resolver404:
            unresolved.append(f"{label}: {url}")
    assert unresolved == [], "rows whose URL does not resolve:\n" + "\n".join(unresolved)
    missing = [
        route
        for route in _routes(get_resolver().url_patterns)
        if route not in covered
        and not any(route == p or (p.endswith("/") and route.startswith(p)) for p in NOT_IN_MATRIX)
    ]
    assert missing == [], "URL patterns with no row in ROWS:\n" + "\n".join(missing)
