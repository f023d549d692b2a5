"""`manage.py chemistry` for outside checks: JSON shape, values and refusals."""

from __future__ import annotations

import json
from io import StringIO

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError


def run(*args: str) -> dict:
    out = StringIO()
    call_command("chemistry", *args, "--format", "json", stdout=out)
    return json.loads(out.getvalue())


def test_addition_json():
    # Worked example: 1000 L, 60 → 75 g/L with 250 g/L stock: a = 1000 × 15 / 175 = 85.714 L.
    r = run(
        "addition",
        "--volume-l",
        "1000",
        "--measured",
        "60",
        "--target",
        "75",
        "--stock",
        "250",
        "--unit",
        "g/L",
    )
    assert r["add_l"] == pytest.approx(85.714286, rel=1e-6)
    assert r["new_volume_l"] == pytest.approx(1085.714286, rel=1e-6)
    assert "add acid to water" in r["caution"]


def test_addition_in_oz_per_gallon_gives_the_same_litres():
    # The mass balance is linear in concentration: the same bath in oz/gal (÷ 7.4891517)
    # needs the same litres.
    f = 7.489151707
    r = run(
        "addition",
        "--volume-l",
        "1000",
        "--measured",
        str(60 / f),
        "--target",
        str(75 / f),
        "--stock",
        str(250 / f),
        "--unit",
        "oz/gal",
    )
    assert r["add_l"] == pytest.approx(85.714286, rel=1e-6)


def test_plating_json_and_inverse():
    # Acid copper, 2 A/dm², 60 min, 95 %: 0.220516 × 2 × 60 × 0.95 = 25.139 µm.
    r = run(
        "plating",
        "--metal",
        "copper",
        "--current-density-asd",
        "2",
        "--minutes",
        "60",
        "--efficiency",
        "0.95",
    )
    assert r["thickness_um"] == pytest.approx(25.139, abs=0.001)
    back = run(
        "plating",
        "--metal",
        "copper",
        "--current-density-asd",
        "2",
        "--thickness-um",
        str(r["thickness_um"]),
        "--efficiency",
        "95",
    )
    assert back["minutes"] == pytest.approx(60.0)


def test_refusals_exit_2_with_the_reason():
    with pytest.raises(CommandError, match="not stronger than the target") as exc:
        run(
            "addition",
            "--volume-l",
            "1000",
            "--measured",
            "60",
            "--target",
            "75",
            "--stock",
            "70",
        )
    assert exc.value.returncode == 2
    with pytest.raises(CommandError, match="not a concentration unit"):
        run(
            "addition",
            "--volume-l",
            "1",
            "--measured",
            "1",
            "--target",
            "2",
            "--stock",
            "9",
            "--unit",
            "pH",
        )
    with pytest.raises(CommandError, match="give --current-density-asd and --minutes"):
        run("plating", "--metal", "tin", "--minutes", "3")
