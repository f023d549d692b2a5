"""Time the routing builder: one routing at 2, 8 and 24 layers, and 1,000 previews.

Why: the spec form previews the routing on every edit, and the Django side rebuilds
routings when the process library changes, so the pure core must stay fast. Run as a
script (prints JSON) or call `run()` from the bench harness.
"""

from __future__ import annotations

import json
import statistics
import sys
import time
from pathlib import Path
from typing import Any

if __package__ in (None, ""):
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from routing.builder import ProcessLibrary, build_routing, parse_spec, routing_to_dict
from routing.builder.examples import EXAMPLE_SPECS


def _eight_layer() -> dict[str, Any]:
    return EXAMPLE_SPECS["eight_layer_buried"]


def _median_ms(spec: dict[str, Any], repeats: int = 50) -> float:
    parsed = parse_spec(spec)
    library = ProcessLibrary.default()
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        build_routing(parsed, library)
        times.append(time.perf_counter() - start)
    return round(statistics.median(times) * 1000.0, 3)


def run() -> dict[str, float]:
    """Median build time per board (ms) and wall time of 1,000 previews (s).

    A preview is what the spec form does: parse the spec, build, render to the dict.
    """
    ProcessLibrary.default()  # validate and cache the library outside the timings
    spec24 = EXAMPLE_SPECS["twenty_four_layer_hdi"]
    if parse_spec(spec24).lamination.cycles != 3:
        raise RuntimeError("the 24-layer benchmark spec must need 3 lamination cycles")
    result = {
        "routing_ms_2": _median_ms(EXAMPLE_SPECS["two_layer"]),
        "routing_ms_8": _median_ms(_eight_layer()),
        "routing_ms_24": _median_ms(spec24),
    }
    specs = [EXAMPLE_SPECS["two_layer"], _eight_layer(), spec24]
    start = time.perf_counter()
    for i in range(1000):
        routing_to_dict(build_routing(parse_spec(specs[i % 3])))
    result["previews_1000_s"] = round(time.perf_counter() - start, 3)
    return result


if __name__ == "__main__":
    print(json.dumps(run(), indent=2))
