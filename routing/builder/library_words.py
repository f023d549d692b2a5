# ruff: noqa: E501  (hazard notes are single catalogue entries)
"""The built-in process library's names and hazard notes, for the translation catalogue.

Listed from `ProcessLibrary.default()` and `WORK_CENTERS`: after changing the built-in
library, `python -m routing.builder.library_words` prints the lines of `LIBRARY_WORDS`
(tests/routing/test_labels.py fails while a name is missing). The tablet and the
traveller look each name up in the catalogue (`shopfloor.floor.words.library_text`);
a name or note an engineer edited is shown as written.
"""

from __future__ import annotations

from typing import Final


def gettext_noop(text: str) -> str:
    """Marks `text` for the translation catalogue; returns it unchanged."""
    return text


LIBRARY_WORDS: Final[tuple[str, ...]] = (
    gettext_noop("Engineering and CAM"),
    gettext_noop("Imaging room"),
    gettext_noop("Inner-layer wet line"),
    gettext_noop("Automated optical inspection"),
    gettext_noop("Lamination"),
    gettext_noop("Mechanical drilling"),
    gettext_noop("Laser drilling"),
    gettext_noop("Desmear and hole metallisation line"),
    gettext_noop("Electroplating line"),
    gettext_noop("Outer-layer strip and etch line"),
    gettext_noop("Solder mask"),
    gettext_noop("Legend printing"),
    gettext_noop("Surface finish line"),
    gettext_noop("Hot-air solder levelling"),
    gettext_noop("Edge-connector gold plating"),
    gettext_noop("Electrical test"),
    gettext_noop("Profiling"),
    gettext_noop("Final inspection"),
    gettext_noop("Packing and shipping"),
    gettext_noop("Engineering review and data checks"),
    gettext_noop("Phototools or direct-imaging data"),
    gettext_noop("Inner-layer clean"),
    gettext_noop("Inner-layer imaging"),
    gettext_noop("Inner-layer develop"),
    gettext_noop("Inner-layer etch"),
    gettext_noop("Inner-layer resist strip"),
    gettext_noop("Inner-layer AOI"),
    gettext_noop("Post-etch punch"),
    gettext_noop("Bond treatment (oxide replacement)"),
    gettext_noop("Layup"),
    gettext_noop("Press"),
    gettext_noop("X-ray target drill and trim"),
    gettext_noop("Deburr"),
    gettext_noop("Deburr and desmear"),
    gettext_noop("Hole metallisation"),
    gettext_noop("Panel plating (sub-assembly)"),
    gettext_noop("Outer-layer clean"),
    gettext_noop("Outer-layer imaging"),
    gettext_noop("Outer-layer develop"),
    gettext_noop("Pattern plating, copper"),
    gettext_noop("Pattern plating, tin etch resist"),
    gettext_noop("Outer-layer resist strip"),
    gettext_noop("Outer-layer etch"),
    gettext_noop("Tin strip"),
    gettext_noop("Outer-layer AOI"),
    gettext_noop("Solder mask pre-clean"),
    gettext_noop("Solder mask coat"),
    gettext_noop("Solder mask tack dry"),
    gettext_noop("Solder mask expose"),
    gettext_noop("Solder mask develop"),
    gettext_noop("Legend print"),
    gettext_noop("Final cure"),
    gettext_noop("Tape for finger plating"),
    gettext_noop("Finger nickel plate"),
    gettext_noop("Finger hard gold plate"),
    gettext_noop("Remove finger tape"),
    gettext_noop("ENIG pre-clean"),
    gettext_noop("Electroless nickel (ENIG)"),
    gettext_noop("Immersion gold (ENIG)"),
    gettext_noop("ENEPIG pre-clean"),
    gettext_noop("Electroless nickel (ENEPIG)"),
    gettext_noop("Electroless palladium"),
    gettext_noop("Immersion gold (ENEPIG)"),
    gettext_noop("Immersion silver pre-clean"),
    gettext_noop("Immersion silver"),
    gettext_noop("Immersion tin pre-clean"),
    gettext_noop("Immersion tin"),
    gettext_noop("HASL pre-clean"),
    gettext_noop("HASL flux"),
    gettext_noop("Hot-air solder levelling (lead-free)"),
    gettext_noop("HASL post-clean"),
    gettext_noop("OSP pre-clean"),
    gettext_noop("OSP coat"),
    gettext_noop("Electrical test, flying probe"),
    gettext_noop("Electrical test, fixture"),
    gettext_noop("Profile route"),
    gettext_noop("V-score"),
    gettext_noop("Finger bevel"),
    gettext_noop("Repair at the AOI verify station"),
    gettext_noop("Verify the repair"),
    gettext_noop("Repair electrical test failures"),
    gettext_noop("Strip solder mask"),
    gettext_noop("Strip the surface finish"),
    gettext_noop("Pack"),
    gettext_noop(
        "Etchant and stripper are corrosive: wear the chemical gloves, apron and face shield the line requires and keep the extraction running. This note does not replace the site's safety procedures, the safety data sheets, local codes or the governing standards."
    ),
    gettext_noop(
        "UV exposure: keep interlocks closed and do not look at the lamp; wear UV-rated eye protection when the unit must be opened. This note does not replace the site's safety procedures, the safety data sheets, local codes or the governing standards."
    ),
    gettext_noop(
        "Plating and pre-treatment chemistry is corrosive and some baths are toxic: wear the required gloves, apron and eye protection; never mix acids and cyanide- or metal-bearing solutions. This note does not replace the site's safety procedures, the safety data sheets, local codes or the governing standards."
    ),
    gettext_noop(
        "Hot press: platens near 200 °C and high closing force; keep hands clear and use the loading tools. This note does not replace the site's safety procedures, the safety data sheets, local codes or the governing standards."
    ),
    gettext_noop(
        "Class 4 laser inside the enclosure: never defeat the interlocks; only trained staff service the beam path. This note does not replace the site's safety procedures, the safety data sheets, local codes or the governing standards."
    ),
    gettext_noop(
        "Molten solder and hot air near 250 °C: wear the heat-resistant gloves, face shield and sleeves; keep water away from the solder pot; fumes need extraction. This note does not replace the site's safety procedures, the safety data sheets, local codes or the governing standards."
    ),
)


if __name__ == "__main__":  # pragma: no cover - a maintenance helper
    from routing.builder.default_library import WORK_CENTERS
    from routing.builder.library import ProcessLibrary

    lib = ProcessLibrary.default()
    texts = [*WORK_CENTERS.values(), *(s.name for s in lib.steps.values())]
    texts += [s.hazard for s in lib.steps.values() if s.hazard]
    for text in dict.fromkeys(texts):
        print(f"    gettext_noop({text!r}),")
