"""The starting site lists as the migrations first seeded them: FROZEN, never edited.

floor/migrations/0004_materials_scrap_acceptance.py and quality/migrations/0004_ncr_root_cause.py
seed from these lists, and a migration must do the same thing whenever it runs (a new
database runs it years later). So this module never changes: tests/floor/test_site_lists.py
pins its content. To change the starting lists, add site_lists_v2.py (the whole new
lists), a data migration that seeds what v2 adds (never rewriting rows a site edited),
and point shopfloor/floor/site_lists.py at v2. Plain data only: no Django, no app imports
(a migration imports it).
"""

from __future__ import annotations

from django.utils.translation import gettext_noop  # names shown translated on the tablet

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
    ("open", gettext_noop("Open circuit")),
    ("short", gettext_noop("Short circuit")),
    ("plating_thin", gettext_noop("Plating too thin")),
    ("registration", gettext_noop("Misregistration")),
    ("mask_defect", gettext_noop("Solder mask defect")),
    ("finish_defect", gettext_noop("Surface finish defect")),
    ("delamination", gettext_noop("Delamination or blister")),
    ("handling", gettext_noop("Handling damage (scratch, dent, bent)")),
    ("dimension", gettext_noop("Out of dimension")),
    ("drill", gettext_noop("Drill defect (missing, extra or misplaced hole)")),
    ("contamination", gettext_noop("Contamination")),
    ("other", gettext_noop("Other (say what in the note)")),
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
