"""The built-in process library as data: every step's name, work center, instructions,
parameters, standard minutes, hazard reminders, queue-time limits and measurement
windows, and the site's work centers and material kinds.

Plain data for a new site to start from (the process engineer edits the stored copy in
the admin; `routing/builder/library.py` checks an edited library and serves it). Parameters
are starting values for invented, generic lines; each line's own process sheet governs.
Hazard notes are reminders, never a substitute for the site's safety procedures and
safety data sheets.
"""

from __future__ import annotations

from typing import Any, Final

_SAFETY: Final = (
    " This note does not replace the site's safety procedures, the safety data sheets, "
    "local codes or the governing standards."
)


_ETCHANT: Final = (
    "Etchant and stripper are corrosive: wear the chemical gloves, apron and face "
    "shield the line requires and keep the extraction running." + _SAFETY
)


_PLATING: Final = (
    "Plating and pre-treatment chemistry is corrosive and some baths are toxic: wear "
    "the required gloves, apron and eye protection; never mix acids and cyanide- or "
    "metal-bearing solutions." + _SAFETY
)


_UV: Final = (
    "UV exposure: keep interlocks closed and do not look at the lamp; wear UV-rated "
    "eye protection when the unit must be opened." + _SAFETY
)


_LASER: Final = (
    "Class 4 laser inside the enclosure: never defeat the interlocks; only trained "
    "staff service the beam path." + _SAFETY
)


_MOLTEN_SOLDER: Final = (
    "Molten solder and hot air near 250 °C: wear the heat-resistant gloves, face "
    "shield and sleeves; keep water away from the solder pot; fumes need extraction." + _SAFETY
)


_HOT_PRESS: Final = (
    "Hot press: platens near 200 °C and high closing force; keep hands clear and use "
    "the loading tools." + _SAFETY
)


WORK_CENTERS: Final[dict[str, str]] = {
    "cam": "Engineering and CAM",
    "imaging": "Imaging room",
    "inner_wet": "Inner-layer wet line",
    "aoi": "Automated optical inspection",
    "lamination": "Lamination",
    "drilling": "Mechanical drilling",
    "laser": "Laser drilling",
    "wet_process": "Desmear and hole metallisation line",
    "plating": "Electroplating line",
    "outer_wet": "Outer-layer strip and etch line",
    "solder_mask": "Solder mask",
    "legend": "Legend printing",
    "finish_line": "Surface finish line",
    "hasl": "Hot-air solder levelling",
    "gold_plating": "Edge-connector gold plating",
    "etest": "Electrical test",
    "profiling": "Profiling",
    "inspection": "Final inspection",
    "shipping": "Packing and shipping",
}


def _step(
    name: str,
    work_center: str,
    instructions: str,
    minutes: int,
    parameters: dict[str, Any] | None = None,
    *,
    hazard: str | None = None,
    queue: int | None = None,
    queue_until: str | None = None,
    measurements: dict[str, dict[str, Any]] | None = None,
    materials: list[str] | None = None,
    rework: list[str] | None = None,
) -> dict[str, Any]:
    extra: dict[str, Any] = {}
    if materials is not None:
        extra["materials"] = materials
    if rework is not None:
        extra["rework"] = rework
    return {
        "name": name,
        "work_center": work_center,
        "instructions": instructions,
        "parameters": parameters or {},
        "standard_minutes": minutes,
        "hazard": hazard,
        "queue_time_limit_minutes": queue,
        "queue_time_until": queue_until,
        "measurements": measurements or {},
        **extra,
    }


#: Plated holes are drilled this much over their finished size, to leave room for the
#: hole-wall copper (about 25 um a side) and the surface finish. Shop practice, from
#: memory: 0.1 mm (4 mil) is the usual allowance for plated through-holes, some shops use
#: up to 0.15 mm; a site edits `plating_allowance_mm` of the drill step in the process
#: library (admin) to its own practice.
DEFAULT_PLATING_ALLOWANCE_MM: Final = 0.1


_ETCH_PARAMS: Final = {
    "conveyor_speed_m_per_min": 1.8,
    "temperature_c": 50,
    "etchant": "cupric chloride",
}


#: Default rework after solder mask defects: strip the mask and apply it again (a mask
#: that is misregistered or thin cannot be patched; common practice).
_MASK_REDO: Final = [
    "mask_strip",
    "mask_clean",
    "mask_coat",
    "mask_tack_dry",
    "mask_expose",
    "mask_develop",
]


#: The kinds of material a step may consume (the plant's material lot kinds).
MATERIAL_KINDS: Final = (
    "laminate",
    "prepreg",
    "foil",
    "dry_film",
    "mask_ink",
    "legend_ink",
    "chemistry",
    "other",
)


#: The default library. Plain JSON types only, so it can be stored and edited as JSON.
DEFAULT_LIBRARY: Final[dict[str, Any]] = {
    "version": 1,
    "work_centers": dict(WORK_CENTERS),
    "steps": {
        "engineering_review": _step(
            "Engineering review and data checks",
            "cam",
            "Check the customer data against the build spec: layer count, stack-up, drill "
            "sizes, netlist and design rules. Record any query before releasing the lot.",
            60,
        ),
        "phototool_prep": _step(
            "Phototools or direct-imaging data",
            "cam",
            "Prepare plotted phototools or direct-imaging files with scaling for each layer; "
            "check registration targets.",
            30,
        ),
        "inner_clean": _step(
            "Inner-layer clean",
            "inner_wet",
            "Clean and microetch the cores; handle by the edges only.",
            15,
            {"microetch_um": 1.0},
            hazard=_ETCHANT,
        ),
        "inner_image": _step(
            "Inner-layer imaging",
            "imaging",
            "Laminate dry film and expose the inner-layer image; check registration to the "
            "tooling holes.",
            30,
            {"exposure_mj_per_cm2": 60},
            hazard=_UV,
            materials=["dry_film"],
        ),
        "inner_develop": _step(
            "Inner-layer develop",
            "inner_wet",
            "Develop the exposed resist; inspect for resist residues.",
            10,
            {"developer": "sodium carbonate 1 %", "temperature_c": 30},
        ),
        "inner_etch": _step(
            "Inner-layer etch",
            "inner_wet",
            "Etch the exposed copper; check the first panel's line widths before the rest.",
            15,
            dict(_ETCH_PARAMS),
            hazard=_ETCHANT,
        ),
        "inner_strip": _step(
            "Inner-layer resist strip",
            "inner_wet",
            "Strip the resist and dry the cores.",
            10,
            {"stripper": "sodium hydroxide 3 %", "temperature_c": 50},
            hazard=_ETCHANT,
        ),
        "inner_aoi": _step(
            "Inner-layer AOI",
            "aoi",
            "Scan every inner layer; verify each call and repair or scrap before release.",
            30,
            measurements={"aoi_defects": {}},
            rework=["aoi_repair", "aoi_repair_verify"],
        ),
        "post_etch_punch": _step(
            "Post-etch punch",
            "inner_wet",
            "Punch the lamination tooling slots optically to the etched targets.",
            10,
        ),
        "bond_treatment": _step(
            "Bond treatment (oxide replacement)",
            "inner_wet",
            "Treat the cores for bond strength; press within the queue-time limit or re-treat.",
            20,
            {"temperature_c": 35},
            hazard=_PLATING,
            queue=480,
            queue_until="press",
        ),
        "layup": _step(
            "Layup",
            "lamination",
            "Stack cores, prepreg and foil as the stack-up says; check the build sheet "
            "against the job.",
            40,
            materials=["laminate", "prepreg", "foil"],
        ),
        "press": _step(
            "Press",
            "lamination",
            "Run the press cycle for the laminate system; record the cycle chart.",
            180,
            {
                "cycle_profile": "FR-4 high-Tg standard",
                "pressure_kpa": 2400,
                "max_temperature_c": 195,
            },
            hazard=_HOT_PRESS,
        ),
        "xray_drill_trim": _step(
            "X-ray target drill and trim",
            "lamination",
            "Drill tooling holes on the X-ray targets and trim the panel flash.",
            15,
        ),
        "drill_mechanical": _step(
            "Mechanical drilling",
            "drilling",
            "Drill to the drill file; check the first hole sizes and positions.",
            90,
            {
                "entry": "aluminium",
                "backup": "phenolic",
                "plating_allowance_mm": DEFAULT_PLATING_ALLOWANCE_MM,
            },
        ),
        "drill_laser": _step(
            "Laser drilling",
            "laser",
            "Laser-drill the microvias; check the first via diameters and the capture pads.",
            60,
            {"laser_hole_mm": 0.1},
            hazard=_LASER,
        ),
        "deburr": _step("Deburr", "wet_process", "Deburr and clean the drilled panels.", 10),
        "desmear": _step(
            "Deburr and desmear",
            "wet_process",
            "Deburr, then desmear the hole walls; check weight loss on the test coupon.",
            40,
            {"permanganate_temperature_c": 75, "dwell_min": 10},
            hazard=_PLATING,
        ),
        "hole_metallisation": _step(
            "Hole metallisation",
            "wet_process",
            "Make the hole walls conductive; backlight a coupon before plating.",
            60,
            {"method": "electroless copper", "temperature_c": 32},
            hazard=_PLATING,
            queue=720,
            queue_until="next_plating",
        ),
        "panel_plate": _step(
            "Panel plating (sub-assembly)",
            "plating",
            "Electroplate the sub-assembly panel; cross-section a coupon.",
            90,
            {"current_density_a_per_dm2": 2.0, "time_min": 60},
            hazard=_PLATING,
            measurements={"hole_wall_copper": {}},
        ),
        "outer_clean": _step(
            "Outer-layer clean",
            "outer_wet",
            "Clean and microetch the panels.",
            15,
            {"microetch_um": 1.0},
            hazard=_ETCHANT,
        ),
        "outer_image": _step(
            "Outer-layer imaging",
            "imaging",
            "Laminate dry film and expose the outer-layer image; check registration to the "
            "drilled holes.",
            40,
            {"exposure_mj_per_cm2": 70},
            hazard=_UV,
            materials=["dry_film"],
        ),
        "outer_develop": _step(
            "Outer-layer develop",
            "outer_wet",
            "Develop the resist; inspect the first panel.",
            10,
            {"developer": "sodium carbonate 1 %", "temperature_c": 30},
        ),
        "pattern_plate_copper": _step(
            "Pattern plating, copper",
            "plating",
            "Electroplate copper in the holes and on the pattern; cross-section a coupon.",
            120,
            {"current_density_a_per_dm2": 2.0, "time_min": 70},
            hazard=_PLATING,
            measurements={"hole_wall_copper": {}, "surface_copper": {}},
        ),
        "pattern_plate_tin": _step(
            "Pattern plating, tin etch resist",
            "plating",
            "Plate tin over the copper pattern as etch resist.",
            30,
            {"current_density_a_per_dm2": 1.5, "time_min": 12},
            hazard=_PLATING,
        ),
        "outer_resist_strip": _step(
            "Outer-layer resist strip",
            "outer_wet",
            "Strip the dry film.",
            10,
            {"stripper": "sodium hydroxide 3 %", "temperature_c": 50},
            hazard=_ETCHANT,
        ),
        "outer_etch": _step(
            "Outer-layer etch",
            "outer_wet",
            "Etch the exposed copper; check the first panel's line widths.",
            15,
            {"conveyor_speed_m_per_min": 2.0, "temperature_c": 48, "etchant": "ammoniacal"},
            hazard=_ETCHANT,
        ),
        "tin_strip": _step(
            "Tin strip",
            "outer_wet",
            "Strip the tin etch resist and dry the panels.",
            10,
            {"temperature_c": 30},
            hazard=_ETCHANT,
        ),
        "outer_aoi": _step(
            "Outer-layer AOI",
            "aoi",
            "Scan both sides; verify each call and repair or scrap before release.",
            30,
            measurements={"aoi_defects": {}},
            rework=["aoi_repair", "aoi_repair_verify"],
        ),
        "mask_clean": _step(
            "Solder mask pre-clean",
            "solder_mask",
            "Scrub or chemically clean the panels.",
            15,
            hazard=_ETCHANT,
        ),
        "mask_coat": _step(
            "Solder mask coat",
            "solder_mask",
            "Coat the liquid photoimageable mask.",
            25,
            {"method": "screen or spray"},
            materials=["mask_ink"],
        ),
        "mask_tack_dry": _step(
            "Solder mask tack dry",
            "solder_mask",
            "Tack-dry the mask in the oven.",
            30,
            {"temperature_c": 80, "time_min": 30},
        ),
        "mask_expose": _step(
            "Solder mask expose",
            "solder_mask",
            "Expose the mask image; check registration on the first panel.",
            20,
            {"exposure_mj_per_cm2": 400},
            hazard=_UV,
        ),
        "mask_develop": _step(
            "Solder mask develop",
            "solder_mask",
            "Develop the mask; check registration and that pads are clean.",
            15,
            {"developer": "sodium carbonate 1 %", "temperature_c": 30},
            measurements={"mask_registration": {}},
            rework=_MASK_REDO,
        ),
        "legend_print": _step(
            "Legend print",
            "legend",
            "Print the legend; check it is legible and off the pads.",
            20,
            materials=["legend_ink"],
        ),
        "final_cure": _step(
            "Final cure",
            "solder_mask",
            "Cure mask and legend fully before any finish chemistry.",
            60,
            {"temperature_c": 150, "time_min": 60},
            measurements={"mask_thickness": {}},
            rework=[*_MASK_REDO, "final_cure"],
        ),
        "gold_tape": _step(
            "Tape for finger plating",
            "gold_plating",
            "Tape the panel so only the edge-connector fingers are exposed.",
            20,
        ),
        "gold_nickel_plate": _step(
            "Finger nickel plate",
            "gold_plating",
            "Electroplate nickel on the fingers as the gold underplate.",
            20,
            {"current_density_a_per_dm2": 3.0, "time_min": 8},
            hazard=_PLATING,
        ),
        "gold_plate": _step(
            "Finger hard gold plate",
            "gold_plating",
            "Electroplate hard gold on the fingers; measure by XRF.",
            20,
            {"current_density_a_per_dm2": 1.0, "time_min": 10},
            hazard=_PLATING,
            measurements={"nickel_thickness": {}, "gold_thickness": {}},
        ),
        "gold_untape": _step(
            "Remove finger tape",
            "gold_plating",
            "Remove the tape and any adhesive residue; protect the fingers for later finishing.",
            15,
        ),
        "enig_clean": _step(
            "ENIG pre-clean",
            "finish_line",
            "Clean, microetch and activate the copper.",
            15,
            hazard=_PLATING,
        ),
        "enig_nickel": _step(
            "Electroless nickel (ENIG)",
            "finish_line",
            "Deposit electroless nickel.",
            25,
            {"temperature_c": 85, "time_min": 20},
            hazard=_PLATING,
        ),
        "enig_gold": _step(
            "Immersion gold (ENIG)",
            "finish_line",
            "Deposit immersion gold; measure nickel and gold by XRF.",
            15,
            {"temperature_c": 85, "time_min": 10},
            hazard=_PLATING,
            queue=2880,
            queue_until="pack",
            measurements={"nickel_thickness": {}, "gold_thickness": {}},
            rework=["finish_strip", "enig_clean", "enig_nickel", "enig_gold"],
        ),
        "enepig_clean": _step(
            "ENEPIG pre-clean",
            "finish_line",
            "Clean, microetch and activate the copper.",
            15,
            hazard=_PLATING,
        ),
        "enepig_nickel": _step(
            "Electroless nickel (ENEPIG)",
            "finish_line",
            "Deposit electroless nickel.",
            25,
            {"temperature_c": 85, "time_min": 20},
            hazard=_PLATING,
        ),
        "enepig_palladium": _step(
            "Electroless palladium",
            "finish_line",
            "Deposit electroless palladium.",
            15,
            {"temperature_c": 55, "time_min": 8},
            hazard=_PLATING,
        ),
        "enepig_gold": _step(
            "Immersion gold (ENEPIG)",
            "finish_line",
            "Deposit immersion gold; measure nickel, palladium and gold by XRF.",
            15,
            {"temperature_c": 80, "time_min": 10},
            hazard=_PLATING,
            queue=2880,
            queue_until="pack",
            measurements={"nickel_thickness": {}, "palladium_thickness": {}, "gold_thickness": {}},
            rework=[
                "finish_strip",
                "enepig_clean",
                "enepig_nickel",
                "enepig_palladium",
                "enepig_gold",
            ],
        ),
        "silver_clean": _step(
            "Immersion silver pre-clean",
            "finish_line",
            "Clean and microetch the copper.",
            15,
            hazard=_PLATING,
        ),
        "silver_immersion": _step(
            "Immersion silver",
            "finish_line",
            "Deposit immersion silver; measure by XRF; handle with clean gloves only.",
            15,
            {"temperature_c": 45, "time_min": 2},
            hazard=_PLATING,
            queue=480,
            queue_until="pack",
            measurements={"silver_thickness": {}},
            rework=["finish_strip", "silver_clean", "silver_immersion"],
        ),
        "tin_clean": _step(
            "Immersion tin pre-clean",
            "finish_line",
            "Clean and microetch the copper.",
            15,
            hazard=_PLATING,
        ),
        "tin_immersion": _step(
            "Immersion tin",
            "finish_line",
            "Deposit immersion tin; measure by XRF.",
            20,
            {"temperature_c": 70, "time_min": 12},
            hazard=_PLATING,
            queue=1440,
            queue_until="pack",
            measurements={"tin_thickness": {}},
            rework=["finish_strip", "tin_clean", "tin_immersion"],
        ),
        "hasl_clean": _step(
            "HASL pre-clean", "hasl", "Microetch the copper and dry.", 10, hazard=_ETCHANT
        ),
        "hasl_flux": _step(
            "HASL flux", "hasl", "Apply flux evenly to both sides.", 5, materials=["chemistry"]
        ),
        "hasl_level": _step(
            "Hot-air solder levelling (lead-free)",
            "hasl",
            "Dip in lead-free solder and level with the air knives; check hole sizes and "
            "coverage on the first panel.",
            20,
            {"solder_temperature_c": 265, "dwell_s": 3, "air_knife_temperature_c": 280},
            hazard=_MOLTEN_SOLDER,
        ),
        "hasl_post_clean": _step("HASL post-clean", "hasl", "Wash off flux residues and dry.", 10),
        "osp_clean": _step(
            "OSP pre-clean", "finish_line", "Clean and microetch the copper.", 10, hazard=_ETCHANT
        ),
        "osp_coat": _step(
            "OSP coat",
            "finish_line",
            "Apply the organic solderability preservative; handle with clean gloves only.",
            10,
            {"temperature_c": 40, "time_s": 60},
            queue=1440,
            queue_until="pack",
            measurements={"osp_thickness": {}},
        ),
        "etest_flying_probe": _step(
            "Electrical test, flying probe",
            "etest",
            "Test every board against the netlist; mark and segregate failures.",
            120,
            measurements={"etest_opens": {}, "etest_shorts": {}, "etest_failed": {}},
            rework=["etest_repair", "etest_flying_probe"],
        ),
        "etest_fixture": _step(
            "Electrical test, fixture",
            "etest",
            "Test every board on the job's fixture against the netlist; mark and segregate "
            "failures.",
            45,
            measurements={"etest_opens": {}, "etest_shorts": {}, "etest_failed": {}},
            rework=["etest_repair", "etest_fixture"],
        ),
        "profile_route": _step(
            "Profile route",
            "profiling",
            "Route the board outline; check the first board's dimensions.",
            45,
            {"spindle_rpm": 30000},
        ),
        "profile_vscore": _step(
            "V-score",
            "profiling",
            "Score both sides; check web and depth on the first panel.",
            30,
            {"blade_angle_deg": 30},
            measurements={"vscore_web": {}, "vscore_depth": {}},
        ),
        "finger_bevel": _step(
            "Finger bevel",
            "profiling",
            "Bevel the edge-connector fingers to the drawing.",
            15,
            {"bevel_angle_deg": 30},
        ),
        "final_inspection": _step(
            "Final inspection",
            "inspection",
            "Inspect visually and measure to the drawing; record readings on the traveller.",
            60,
            measurements={
                "board_thickness": {},
                "bow_twist": {},
                "finished_hole_diameter": {},
                "conductor_width": {},
            },
        ),
        # Rework-only steps: no build routing uses them; a disposition inserts them.
        "aoi_repair": _step(
            "Repair at the AOI verify station",
            "aoi",
            "Repair the confirmed defects the NCR names (add or remove copper as the "
            "defect needs) on the panels listed; never repair a defect the customer's "
            "specification forbids repairing.",
            30,
        ),
        "aoi_repair_verify": _step(
            "Verify the repair",
            "aoi",
            "Re-scan or verify each repaired site under magnification; record the defects "
            "still found (zero to pass).",
            20,
            measurements={"aoi_defects": {}},
        ),
        "etest_repair": _step(
            "Repair electrical test failures",
            "etest",
            "Locate and repair the opens and shorts the tester marked, if the class allows a "
            "repair; otherwise mark the board for scrap.",
            30,
        ),
        "mask_strip": _step(
            "Strip solder mask",
            "solder_mask",
            "Strip the mask in the stripper; rinse and dry; check the copper for attack.",
            40,
            {"stripper": "alkaline mask stripper"},
            hazard=_ETCHANT,
        ),
        "finish_strip": _step(
            "Strip the surface finish",
            "finish_line",
            "Strip the surface finish back to copper as the line's rework sheet says; "
            "rinse and dry before re-finishing.",
            30,
            hazard=_PLATING,
        ),
        "pack": _step(
            "Pack",
            "shipping",
            "Pack in sealed bags with desiccant and humidity card as the finish requires; "
            "label with lot and date.",
            20,
        ),
    },
}


#: Steps only a disposition inserts (an older stored library may lack them; the
#: built-in definitions are used then).
REWORK_ONLY_STEP_CODES: Final = frozenset(
    {"aoi_repair", "aoi_repair_verify", "etest_repair", "mask_strip", "finish_strip"}
)


#: Step codes the builder may ask for; a library without them would break routings.
REQUIRED_STEP_CODES: Final = frozenset(DEFAULT_LIBRARY["steps"]) - REWORK_ONLY_STEP_CODES
