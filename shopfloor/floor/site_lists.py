"""The starting site lists (scrap reasons, shelf lives, NCR root causes).

The migrations seed the same lists; `ensure_site_lists` puts back any that are missing
(an emptied test database, a site that deleted every row), without touching the rows a
site has edited.
"""

from __future__ import annotations

#: Shelf lives are counted from receipt at controlled storage; the supplier's datasheet
#: governs (typical figures, from memory: prepreg about 3 months at 23 degC / 50 % RH,
#: photoimageable mask and legend inks and dry film about 6 months).
SHELF_LIVES = [
    ("prepreg", 90, "typical at 23 degC / 50 % RH (from memory); check the datasheet"),
    ("mask_ink", 180, "typical for photoimageable mask (from memory); check the datasheet"),
    ("legend_ink", 180, "typical (from memory); check the datasheet"),
    ("dry_film", 180, "typical (from memory); check the datasheet"),
]
SCRAP_REASONS = [
    ("open", "Open circuit"),
    ("short", "Short circuit"),
    ("plating_thin", "Plating too thin"),
    ("registration", "Misregistration"),
    ("mask_defect", "Solder mask defect"),
    ("finish_defect", "Surface finish defect"),
    ("delamination", "Delamination or blister"),
    ("handling", "Handling damage (scratch, dent, bent)"),
    ("dimension", "Out of dimension"),
    ("drill", "Drill defect (missing, extra or misplaced hole)"),
    ("contamination", "Contamination"),
    ("other", "Other (say what in the note)"),
]
ROOT_CAUSES = [
    ("process_drift", "Process drift (parameter or chemistry out of control)"),
    ("equipment", "Equipment failure or wear"),
    ("material", "Incoming material"),
    ("operator", "Operator error or training"),
    ("method", "Instructions or method unclear"),
    ("design", "Design or data (CAM) issue"),
    ("measurement", "Measurement error (gauge, method)"),
    ("handling", "Handling or environment"),
    ("unknown", "Not yet determined"),
]


def ensure_site_lists() -> None:
    """Create the starting rows that are missing (never changes an existing row)."""
    from shopfloor.floor.models import ScrapReason, ShelfLife
    from shopfloor.quality.models import RootCause

    for kind, days, note in SHELF_LIVES:
        ShelfLife.objects.get_or_create(kind=kind, defaults={"days": days, "note": note})
    for code, name in SCRAP_REASONS:
        ScrapReason.objects.get_or_create(code=code, defaults={"name": name})
    for code, name in ROOT_CAUSES:
        RootCause.objects.get_or_create(code=code, defaults={"name": name})
