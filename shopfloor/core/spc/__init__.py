"""Statistical process control (SPC): the pure calculation core, one module per step.

Nothing here imports Django or touches a database, so the same code serves the web
service, the Celery workers, the ``manage.py spc evaluate`` command and the tests.
Only the standard library is used (``math``, ``statistics``, ``dataclasses``) so that the
numbers can be audited line by line without trusting a numeric package.

Layout of this package, one module per step, in the order a reading flows through it:

1. ``constants``: control chart constants (d2, d3, c4, A2, A3, B3, B4, D3, D4)
   *computed* from their definitions, not typed in, so no table transcription error
   can creep in.
2. ``limits``: control limits for the individuals / moving range, X-bar/R, X-bar/S, c,
   u, p and np charts (:func:`compute_limits`), or limits fixed by the user
   (:func:`fixed_limits`).
3. ``rules``: Western Electric and Nelson run rules evaluated incrementally
   (:func:`step`) with a small, JSON-serialisable :class:`RuleState`, so the service
   can keep one state per series in the database and never re-read history when a
   reading arrives.
4. ``process_capability``: process capability (Cp, Cpk, Pp, Ppk, expected ppm out of
   specification).
5. ``contract``: :func:`evaluate`, the validated JSON-in / JSON-out contract behind the
   command line.

Nothing is rounded inside this package; callers round for display.
"""

__all__ = [
    "ATTRIBUTE_CHARTS",
    "CHARTS",
    "MAX_SUBGROUP_SIZE",
    "MIN_BASELINE_POINTS",
    "MIN_SUBGROUP_SIZE",
    "RULES",
    "RULESETS",
    "SIZED_CHARTS",
    "STANDARD_LIMITS",
    "VARIABLES_CHARTS",
    "Capability",
    "ChartConstants",
    "ChartKind",
    "Limits",
    "ProportionChart",
    "Rule",
    "RuleState",
    "Signal",
    "SpcInputError",
    "c4",
    "capability",
    "capability_indices",
    "chart_constants",
    "compute_limits",
    "count_limits",
    "d2",
    "d3",
    "evaluate",
    "evaluate_rules",
    "fixed_limits",
    "normal_ppm_out_of_spec",
    "plotted_points",
    "poisson_ppm_above",
    "proportion_chart",
    "proportion_limits",
    "standardized",
    "step",
    "within_sigma",
]

from .constants import (
    MAX_SUBGROUP_SIZE,
    MIN_SUBGROUP_SIZE,
    ChartConstants,
    c4,
    chart_constants,
    d2,
    d3,
)
from .contract import evaluate
from .errors import SpcInputError
from .limits import (
    ATTRIBUTE_CHARTS,
    CHARTS,
    MIN_BASELINE_POINTS,
    SIZED_CHARTS,
    VARIABLES_CHARTS,
    ChartKind,
    Limits,
    compute_limits,
    count_limits,
    fixed_limits,
    plotted_points,
    poisson_ppm_above,
    proportion_limits,
    within_sigma,
)
from .process_capability import Capability, capability, capability_indices, normal_ppm_out_of_spec
from .proportion import STANDARD_LIMITS, ProportionChart, proportion_chart, standardized
from .rules import RULES, RULESETS, Rule, RuleState, Signal, evaluate_rules, step
