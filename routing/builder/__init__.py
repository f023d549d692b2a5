"""The routing builder's pure core: spec -> routing, with no Django imports.

Kept free of Django so it can be tested without a database, run in a Celery worker or
a script, and reasoned about as a function: the same spec and library always give the
same routing. The Django app stores specs, libraries and routings and calls in here.
"""

from .build import Routing, Step, build_routing
from .library import DEFAULT_LIBRARY, LibraryInvalid, ProcessLibrary
from .overrides import (
    Override,
    OverrideInvalid,
    OverrideRefused,
    apply_overrides,
    classify_override,
)
from .render import diff_routings, routing_to_dict, routing_to_text
from .spec import BuildSpec, ShopCapability, SpecError, SpecInvalid, parse_spec
from .spec_schema import spec_json_schema
from .windows import Provenance, Window, window_rule

__all__ = [
    "DEFAULT_LIBRARY",
    "BuildSpec",
    "LibraryInvalid",
    "Override",
    "OverrideInvalid",
    "OverrideRefused",
    "ProcessLibrary",
    "Provenance",
    "Routing",
    "ShopCapability",
    "SpecError",
    "SpecInvalid",
    "Step",
    "Window",
    "apply_overrides",
    "build_routing",
    "classify_override",
    "diff_routings",
    "parse_spec",
    "routing_to_dict",
    "routing_to_text",
    "spec_json_schema",
    "window_rule",
]
