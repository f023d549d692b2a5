"""The site's icon: browsers ask for /favicon.ico on every first visit; pages also link
the SVG version."""

from __future__ import annotations

import struct
from xml.etree import ElementTree

import pytest
from django.test import Client


@pytest.mark.django_db
def test_favicon_ico_is_a_real_icon_at_the_root(client: Client) -> None:
    response = client.get("/favicon.ico")
    assert response.status_code == 200
    body = b"".join(response.streaming_content)  # type: ignore[attr-defined]
    # ICONDIR header: reserved 0, type 1 (icon), then the image count; each 16-byte
    # directory entry starts with width and height, 0 meaning 256 (the ICO file format
    # as Microsoft documents it, "Icons" in the Win32 docs; from memory).
    reserved, kind, count = struct.unpack_from("<HHH", body, 0)
    assert (reserved, kind) == (0, 1)
    sizes = {struct.unpack_from("<BB", body, 6 + 16 * i) for i in range(count)}
    assert {(16, 16), (32, 32)} <= sizes


@pytest.mark.django_db
def test_pages_link_the_svg_icon(client: Client) -> None:
    page = client.get("/floor/login/").content.decode()
    assert 'rel="icon" href="/static/favicon.svg"' in page
    svg = client.get("/static/favicon.svg")
    assert svg.status_code == 200
    root = ElementTree.fromstring(b"".join(svg.streaming_content))  # type: ignore[attr-defined]
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
