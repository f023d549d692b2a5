"""The lamination plan: how many press cycles a via structure needs.

A via structure no press sequence can build is a spec error, not a build error, so
`parse_spec` (routing/builder/spec.py) asks here while it checks the vias.
"""

from __future__ import annotations

from .spec_model import (
    LaminationPlan,
    SubAssembly,
    Via,
)


class Unbuildable(ValueError):
    pass


def _required_stack(v: Via, layers: int) -> tuple[int, int] | None:
    """The stack a via must be drilled in; None for the final (full) stack."""
    if v.from_layer == 1 or v.to_layer == layers:
        return None
    if v.drill == "mechanical":
        return (v.from_layer, v.to_layer)
    # A laser via drills into a surface, so the stack must have that layer outside;
    # build-ups are added in symmetric pairs to keep the panel flat.
    if v.from_layer - 1 <= layers - v.to_layer:
        return (v.from_layer, layers + 1 - v.from_layer)
    return (layers + 1 - v.to_layer, v.to_layer)


def plan_lamination(layers: int, vias: tuple[Via, ...]) -> LaminationPlan:
    """Derive press cycles from the via structure.

    Rule (group vias by span, then nest):

    1. Through vias and blind vias that start at an outer layer are drilled in the
       final cycle, after the last press (laser or controlled-depth drilling).
    2. Every other via is buried and must be drilled and plated while its layers are a
       stack of their own, before the layers around it are pressed on:
       - a mechanical buried via a..b needs the stack La..Lb (a buried 3-4 via in an
         8-layer is a single core drilled and plated before the final press: 2 cycles);
       - a laser buried via needs a stack with its layer on the surface; build-ups are
         pressed in symmetric pairs, so a laser 2-3 via on 8 layers needs L2-L7.
    3. Equal spans merge. Stacks must nest or be disjoint; partial overlap (2-4 with
       3-5) cannot be pressed in any order and is refused.
    4. A stack's cycle is one more than the deepest stack inside it; disjoint stacks of
       the same depth are processed side by side in one cycle. The final cycle follows.
       Stacked laser vias 1-2 and 2-3 (and their mirror) therefore need one cycle per
       stacking level: L2-L(n-1) then the final press.

    One- and two-layer boards are not laminated: 0 cycles.
    """
    if layers < 4:
        return LaminationPlan(cycles=0, sub_assemblies=(), final_vias=vias)
    by_stack: dict[tuple[int, int], list[Via]] = {}
    final: list[Via] = []
    for v in vias:
        stack = _required_stack(v, layers)
        if stack is None:
            final.append(v)
        else:
            by_stack.setdefault(stack, []).append(v)
    spans = sorted(by_stack, key=lambda s: (s[1] - s[0], s[0]))
    for i, a in enumerate(spans):
        for b in spans[i + 1 :]:
            disjoint = a[1] < b[0] or b[1] < a[0]
            nested = (b[0] <= a[0] and a[1] <= b[1]) or (a[0] <= b[0] and b[1] <= a[1])
            if not (disjoint or nested):
                raise Unbuildable(
                    f"sub-assemblies L{a[0]}-L{a[1]} and L{b[0]}-L{b[1]} overlap without "
                    "nesting; no press sequence can build them"
                )
    cycle_of: dict[tuple[int, int], int] = {}
    for s in spans:  # smallest first, so everything inside s is already numbered
        inner = [cycle_of[t] for t in cycle_of if s[0] <= t[0] and t[1] <= s[1]]
        cycle_of[s] = 1 + max(inner, default=0)
    subs = tuple(
        SubAssembly(lo=s[0], hi=s[1], cycle=cycle_of[s], vias=tuple(by_stack[s]))
        for s in sorted(spans, key=lambda s: (cycle_of[s], s[0]))
    )
    cycles = 1 + max(cycle_of.values(), default=0)
    return LaminationPlan(cycles=cycles, sub_assemblies=subs, final_vias=tuple(final))
