"""Stream an IPC-2581 file into plain dataclasses, in bounded memory, refusing XML attacks.

Why streaming: a design file carries every trace and pad (files of 100 MB exist), but a
build spec needs only the layer list, the stack-ups, drill spans, hole sizes and the
outline. `lxml.etree.iterparse` hands us one element at a time; each is read when it
opens and cleared when it closes, with its finished siblings, so memory stays flat
however long the feature lists are. Holes are kept as counts and extremes per drill
layer or span, never one object per hole.

Why refuse every DTD: IPC-2581 is defined by an XML schema and its files never carry a
document type declaration; a DTD in an uploaded file is either a mistake or an attack
(entity expansion, external entities). The parser runs with entity resolution, DTD
loading and network access off, huge-tree limits on, and stops at the root element when
the document declared a DTD at all.

Every length is converted to millimetres as it is read, from the CadHeader `units`
(INCH, MILLIMETER, MICRON, or MILS where an exporter uses it).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import IO, Final

from lxml import etree

__all__ = [
    "SUPPORTED_REVISIONS",
    "UNIT_TO_MM",
    "Design",
    "DesignFileError",
    "HoleStats",
    "Layer",
    "Spec",
    "Stackup",
    "StackupGroup",
    "StackupLayer",
    "Step",
    "read_design",
]

SUPPORTED_REVISIONS: Final = ("B", "B1", "C")
#: Length units a CadHeader may state, to millimetres (exact by definition: 1 in = 25.4 mm).
UNIT_TO_MM: Final[dict[str, float]] = {
    "MILLIMETER": 1.0,
    "INCH": 25.4,
    "MICRON": 0.001,
    "MILS": 0.0254,
    "MIL": 0.0254,
}
#: Plating states that leave copper in the barrel (everything but NONPLATED).
NON_PLATED: Final = frozenset({"NONPLATED", "NON_PLATED"})


class DesignFileError(ValueError):
    """The file cannot be imported; the message says what was found and what is allowed."""


@dataclass
class Spec:
    """A CadHeader Spec: what the file states about a material or the board."""

    name: str
    material: str = ""
    finish: str = ""
    copper_weight_oz: float | None = None
    impedance_ohm: float | None = None
    colour: str = ""


@dataclass
class Layer:
    """A CadData Layer: its function decides whether it is copper, dielectric, mask..."""

    name: str
    function: str
    side: str
    span: tuple[str, str] | None = None
    line: int | None = None


@dataclass
class StackupLayer:
    ref: str
    thickness_mm: float | None
    tol_plus_mm: float | None
    tol_minus_mm: float | None
    sequence: float | None
    spec_refs: list[str] = field(default_factory=list)
    order: int = 0
    line: int | None = None


@dataclass
class StackupGroup:
    name: str
    thickness_mm: float | None
    layers: list[StackupLayer] = field(default_factory=list)


@dataclass
class Stackup:
    name: str
    overall_mm: float | None
    where_measured: str
    tol_plus_mm: float | None
    tol_minus_mm: float | None
    groups: list[StackupGroup] = field(default_factory=list)


@dataclass
class HoleStats:
    """Holes of one drill layer or span: counts and extremes, plated and not."""

    plated: int = 0
    non_plated: int = 0
    min_plated_mm: float | None = None
    max_plated_mm: float | None = None
    min_any_mm: float | None = None

    def add(self, diameter_mm: float, plated: bool) -> None:
        self.min_any_mm = (
            diameter_mm if self.min_any_mm is None else min(self.min_any_mm, diameter_mm)
        )
        if not plated:
            self.non_plated += 1
            return
        self.plated += 1
        self.min_plated_mm = (
            diameter_mm if self.min_plated_mm is None else min(self.min_plated_mm, diameter_mm)
        )
        self.max_plated_mm = (
            diameter_mm if self.max_plated_mm is None else max(self.max_plated_mm, diameter_mm)
        )

    def merge(self, other: HoleStats) -> None:
        """Add another set of holes (two drill layers with one span, several steps)."""
        self.plated += other.plated
        self.non_plated += other.non_plated
        for mine, theirs, pick in (
            ("min_plated_mm", other.min_plated_mm, min),
            ("max_plated_mm", other.max_plated_mm, max),
            ("min_any_mm", other.min_any_mm, min),
        ):
            current = getattr(self, mine)
            if theirs is not None:
                setattr(self, mine, theirs if current is None else pick(current, theirs))

    def merged(self, other: HoleStats) -> HoleStats:
        self.merge(other)
        return self


@dataclass
class Step:
    """A CadData Step: a board, or a panel that repeats other steps."""

    name: str
    bbox: tuple[float, float, float, float] | None = None
    repeats: list[tuple[str, int]] = field(default_factory=list)
    zones: list[tuple[str, str]] = field(default_factory=list)
    #: Hole statistics of LayerFeature holes, by drill layer name.
    drill_holes: dict[str, HoleStats] = field(default_factory=dict)
    #: Hole statistics of padstack holes, by (from layer, to layer) or ("", "") if no span.
    padstack_holes: dict[tuple[str, str], HoleStats] = field(default_factory=dict)
    #: Number of features drawn on each layer (to tell a used legend from an empty one).
    features: dict[str, int] = field(default_factory=dict)

    @property
    def size_mm(self) -> tuple[float, float] | None:
        if self.bbox is None:
            return None
        x0, y0, x1, y1 = self.bbox
        return (x1 - x0, y1 - y0)


@dataclass
class Design:
    """What an IPC-2581 file states, in millimetres, in file order."""

    revision: str
    units: str
    exporter: str | None
    function_mode: str = ""
    layers: dict[str, Layer] = field(default_factory=dict)
    stackups: list[Stackup] = field(default_factory=list)
    specs: dict[str, Spec] = field(default_factory=dict)
    steps: list[Step] = field(default_factory=list)


def _local(tag: object) -> str:
    if not isinstance(tag, str):
        return ""
    return tag.rsplit("}", 1)[-1]


def _parent_name(el: etree._Element, up: int = 1) -> str:
    node: etree._Element | None = el
    for _ in range(up):
        node = node.getparent() if node is not None else None
    return _local(node.tag) if node is not None else ""


#: Elements the reader looks at. lxml matches these in C, so the bulk of a file (trace
#: and pad geometry, components, nets) never reaches Python.
READ_TAGS: Final = frozenset(
    {
        "IPC-2581",
        "FunctionMode",
        "SoftwarePackage",
        "CadHeader",
        "Spec",
        "Impedance",
        "Property",
        "Finish",
        "ColorTerm",
        "Layer",
        "Span",
        "Stackup",
        "StackupGroup",
        "StackupLayer",
        "SpecRef",
        "Step",
        "PolyBegin",
        "PolyStepSegment",
        "PolyStepCurve",
        "StepRepeat",
        "StackupZone",
        "LayerHole",
        "LayerFeature",
        "Hole",
        "Set",
    }
)
#: Large containers read for nothing but freed when they close, so memory stays flat.
FREE_TAGS: Final = frozenset(
    {
        "EntryStandard",
        "EntryUser",
        "EntryLineDesc",
        "EntryFillDesc",
        "EntryColor",
        "EntryFont",
        "BomItem",
        "Avl",
        "Package",
        "Component",
        "PhyNet",
        "LogicalNet",
        "PadStack",
        "PadStackDef",
        "NonstandardAttribute",
        "HistoryRecord",
        "LogisticHeader",
        "Content",
        "Bom",
    }
)
_FILTER: Final = tuple(f"{{*}}{t}" for t in sorted(READ_TAGS | FREE_TAGS)) + tuple(
    sorted(READ_TAGS | FREE_TAGS)
)


class _Reader:
    """One pass over the filtered events; state says which Spec, Stackup, Step is open."""

    def __init__(self) -> None:
        self.revision = ""
        self.units = ""
        self.factor: float | None = None
        self.exporter: str | None = None
        self.function_mode = ""
        self.spec: Spec | None = None
        self.stackup: Stackup | None = None
        self.group: StackupGroup | None = None
        self.slayer: StackupLayer | None = None
        self.layer: Layer | None = None
        self.step: Step | None = None
        self.feature_layer = ""
        self.hole: tuple[float, bool] | None = None
        self.hole_span: tuple[str, str] = ("", "")
        self.order = 0
        self.layers: dict[str, Layer] = {}
        self.stackups: list[Stackup] = []
        self.specs: dict[str, Spec] = {}
        self.steps: list[Step] = []

    # ------------------------------------------------------------------ numbers

    def length(self, el: etree._Element, name: str, *, required: bool = False) -> float | None:
        raw = el.get(name)
        if raw is None or raw.strip() == "":
            if required:
                raise DesignFileError(
                    f"line {el.sourceline}: <{_local(el.tag)}> has no {name}; "
                    "it is required by IPC-2581"
                )
            return None
        try:
            value = float(raw)
        except ValueError:
            raise DesignFileError(
                f"line {el.sourceline}: <{_local(el.tag)}> {name}={raw!r} is not a number"
            ) from None
        if value != value or value in (float("inf"), float("-inf")):
            raise DesignFileError(
                f"line {el.sourceline}: <{_local(el.tag)}> {name}={raw!r} is not a finite number"
            )
        if self.factor is None:
            raise DesignFileError(
                f"line {el.sourceline}: a length ({name}) comes before the CadHeader states "
                "its units; IPC-2581 puts CadHeader units first"
            )
        return value * self.factor

    @staticmethod
    def number(el: etree._Element, name: str) -> float | None:
        raw = el.get(name)
        if raw is None:
            return None
        try:
            value = float(raw)
        except ValueError:
            return None
        return value if value == value else None

    # ------------------------------------------------------------------ events

    def root(self, el: etree._Element) -> None:
        docinfo = el.getroottree().docinfo
        if docinfo.doctype or docinfo.internalDTD is not None or docinfo.externalDTD is not None:
            raise DesignFileError(
                "the file declares a document type (<!DOCTYPE ...>); IPC-2581 files never do, "
                "and DTDs are refused because they can expand entities or read other files"
            )
        name = _local(el.tag)
        if name != "IPC-2581":
            ns = etree.QName(el).namespace if isinstance(el.tag, str) else None
            where = f" in namespace {ns}" if ns else ""
            raise DesignFileError(
                f"this is not an IPC-2581 file: its root element is <{name}>{where}; "
                "an IPC-2581 file starts with <IPC-2581 revision=...>"
            )
        revision = (el.get("revision") or "").strip()
        if revision.upper() not in SUPPORTED_REVISIONS:
            shown = f"revision {revision!r}" if revision else "no revision attribute"
            raise DesignFileError(
                f"unsupported IPC-2581 revision: the file has {shown}; "
                f"supported revisions are {', '.join(SUPPORTED_REVISIONS)}"
            )
        self.revision = revision.upper()

    def start(self, el: etree._Element, tag: str) -> None:
        if self.feature_layer:
            # Inside a LayerFeature only holes matter (sets are counted when they close).
            if tag == "Hole" and self.step is not None:
                hole = self.hole_of(el)
                if hole is not None:
                    stats = self.step.drill_holes.setdefault(self.feature_layer, HoleStats())
                    stats.add(*hole)
            return
        if tag in FREE_TAGS:
            return
        if self.spec is not None:
            self.spec_start(el, tag)
        elif tag == "FunctionMode":
            self.function_mode = el.get("mode") or ""
        elif tag == "SoftwarePackage" and self.exporter is None:
            parts = [el.get("vendor"), el.get("name"), el.get("revision")]
            text = " ".join(p.strip() for p in parts if p and p.strip())
            self.exporter = text or None
        elif tag == "CadHeader":
            units = (el.get("units") or "").strip().upper()
            if units not in UNIT_TO_MM:
                shown = f"units={el.get('units')!r}" if el.get("units") else "no units"
                raise DesignFileError(
                    f"line {el.sourceline}: the CadHeader has {shown}; allowed units are "
                    "INCH, MILLIMETER, MICRON and MILS"
                )
            self.units = units
            self.factor = UNIT_TO_MM[units]
        elif tag == "Spec":
            if _parent_name(el) == "CadHeader":
                self.spec = Spec(name=el.get("name") or "")
        elif tag == "Layer":
            if _parent_name(el) == "CadData":
                self.layer = Layer(
                    name=el.get("name") or "",
                    function=(el.get("layerFunction") or "").strip().upper(),
                    side=(el.get("side") or "").strip().upper(),
                    line=el.sourceline,
                )
        elif tag == "Span":
            parent = _parent_name(el)
            if parent == "Layer" and self.layer is not None:
                self.layer.span = (el.get("fromLayer") or "", el.get("toLayer") or "")
            elif parent == "LayerHole":
                self.hole_span = (el.get("fromLayer") or "", el.get("toLayer") or "")
        elif tag == "Stackup":
            self.stackup = Stackup(
                name=el.get("name") or "",
                overall_mm=self.length(el, "overallThickness"),
                where_measured=(el.get("whereMeasured") or "").upper(),
                tol_plus_mm=self.length(el, "tolPlus"),
                tol_minus_mm=self.length(el, "tolMinus"),
            )
        elif tag == "StackupGroup" and self.stackup is not None:
            self.group = StackupGroup(
                name=el.get("name") or "", thickness_mm=self.length(el, "thickness")
            )
            self.stackup.groups.append(self.group)
        elif tag == "StackupLayer" and self.group is not None:
            self.order += 1
            self.slayer = StackupLayer(
                ref=el.get("layerOrGroupRef") or "",
                thickness_mm=self.length(el, "thickness"),
                tol_plus_mm=self.length(el, "tolPlus"),
                tol_minus_mm=self.length(el, "tolMinus"),
                sequence=self.number(el, "sequence"),
                order=self.order,
                line=el.sourceline,
            )
            self.group.layers.append(self.slayer)
        elif tag == "SpecRef" and self.slayer is not None:
            ref = el.get("id")
            if ref:
                self.slayer.spec_refs.append(ref)
        elif tag == "Step":
            if _parent_name(el) == "CadData":
                self.step = Step(name=el.get("name") or "")
                self.steps.append(self.step)
        elif self.step is not None:
            self.step_start(el, tag)

    def spec_start(self, el: etree._Element, tag: str) -> None:
        spec = self.spec
        assert spec is not None
        if tag == "ColorTerm":
            spec.colour = (el.get("name") or "").strip()
        elif tag == "Impedance":
            spec.impedance_ohm = self.number(el, "value")
        elif tag == "Finish":
            if _parent_name(el) == "SurfaceFinish":
                spec.finish = (el.get("type") or "").strip()
        elif tag == "Property":
            parent = el.getparent()
            kind = _local(parent.tag) if parent is not None else ""
            kind_type = ((parent.get("type") if parent is not None else "") or "").upper()
            if kind == "General" and kind_type == "MATERIAL" and not spec.material:
                spec.material = (el.get("text") or "").strip()
            elif kind == "Conductor" and kind_type == "WEIGHT":
                spec.copper_weight_oz = self.number(el, "value")
            elif kind == "Impedance" and spec.impedance_ohm is None:
                spec.impedance_ohm = self.number(el, "value")

    def step_start(self, el: etree._Element, tag: str) -> None:
        step = self.step
        assert step is not None
        if tag.startswith("Poly"):
            if (
                _parent_name(el) == "Polygon"
                and _parent_name(el, 2) == "Profile"
                and _parent_name(el, 3) == "Step"
            ):
                x, y = self.length(el, "x"), self.length(el, "y")
                if x is not None and y is not None:
                    if step.bbox is None:
                        step.bbox = (x, y, x, y)
                    else:
                        x0, y0, x1, y1 = step.bbox
                        step.bbox = (min(x0, x), min(y0, y), max(x1, x), max(y1, y))
        elif tag == "StepRepeat":
            nx = int(self.number(el, "nx") or 1)
            ny = int(self.number(el, "ny") or 1)
            step.repeats.append((el.get("stepRef") or "", max(nx, 1) * max(ny, 1)))
        elif tag == "StackupZone":
            step.zones.append((el.get("name") or "", el.get("stackupRef") or ""))
        elif tag == "LayerHole":
            self.hole = self.hole_of(el)
            self.hole_span = ("", "")
        elif tag == "LayerFeature":
            self.feature_layer = el.get("layerRef") or ""

    def hole_of(self, el: etree._Element) -> tuple[float, bool] | None:
        diameter = self.length(el, "diameter")
        if diameter is None or diameter <= 0:
            return None
        status = (el.get("platingStatus") or "").strip().upper()
        return (diameter, status not in NON_PLATED)

    def end(self, el: etree._Element, tag: str) -> None:
        if self.feature_layer:
            if tag == "Set" and self.step is not None:
                # A set that draws something (not just a colour reference) uses the layer.
                if any(_local(child.tag) != "ColorRef" for child in el):
                    features = self.step.features
                    features[self.feature_layer] = features.get(self.feature_layer, 0) + 1
            elif tag == "LayerFeature":
                self.feature_layer = ""
            return
        if tag == "Spec" and self.spec is not None and _parent_name(el) == "CadHeader":
            self.specs[self.spec.name] = self.spec
            self.spec = None
        elif tag == "Layer" and self.layer is not None and _parent_name(el) == "CadData":
            self.layers.setdefault(self.layer.name, self.layer)
            self.layer = None
        elif tag == "Stackup" and self.stackup is not None:
            self.stackups.append(self.stackup)
            self.stackup = None
        elif tag == "StackupGroup":
            self.group = None
        elif tag == "StackupLayer":
            self.slayer = None
        elif tag == "LayerHole" and self.step is not None and self.hole is not None:
            stats = self.step.padstack_holes.setdefault(self.hole_span, HoleStats())
            stats.add(*self.hole)
            self.hole = None
        elif tag == "Step" and _parent_name(el) == "CadData":
            self.step = None


#: The root element must appear within this many bytes (a prolog is a few lines).
ROOT_WITHIN_BYTES: Final = 4 * 1024 * 1024


def _syntax_message(exc: etree.XMLSyntaxError) -> str:
    message = str(exc.msg or exc).strip()
    if "entit" in message.lower():
        return (
            f"entity expansion refused ({message}); IPC-2581 files carry no DTD and no "
            "entities, and a DTD is refused"
        )
    return message


def _check_root(source: str | IO[bytes], reader: _Reader) -> None:
    """Read up to the root element only: refuse non-XML, a DTD, another format or revision.

    The main pass filters events by tag in C, so it would never report a foreign root;
    checking it first also means a large file of another kind is refused after one chunk.
    """
    handle: IO[bytes] = open(source, "rb") if isinstance(source, str) else source
    position = 0 if isinstance(source, str) else handle.tell()
    parser = etree.XMLPullParser(
        events=("start",),
        resolve_entities=False,
        no_network=True,
        load_dtd=False,
        huge_tree=False,
    )
    read = 0
    try:
        while True:
            chunk = handle.read(65536)
            if not chunk:
                parser.close()
                for _, el in parser.read_events():
                    reader.root(el)
                    return
                raise DesignFileError(
                    "the file is empty; an IPC-2581 file starts with <IPC-2581 revision=...>"
                )
            parser.feed(chunk)
            for _, el in parser.read_events():
                reader.root(el)
                return
            read += len(chunk)
            if read > ROOT_WITHIN_BYTES:
                raise DesignFileError(
                    "no root element in the first 4 MB: this is not an IPC-2581 file"
                )
    except etree.XMLSyntaxError as exc:
        message = _syntax_message(exc) or "no XML element found"
        raise DesignFileError(
            f"this is not an XML file an IPC-2581 import can read: {message}"
        ) from None
    except OSError as exc:
        raise DesignFileError(f"cannot read the file: {exc}") from None
    finally:
        if isinstance(source, str):
            handle.close()
        else:
            handle.seek(position)


def read_design(source: str | IO[bytes]) -> Design:
    """Read an IPC-2581 file (a path or a seekable binary file object).

    Raises `DesignFileError` naming what was found when the file is not XML, not
    IPC-2581, of an unsupported revision, declares a DTD, or states no units.
    """
    reader = _Reader()
    _check_root(source, reader)
    try:
        events = etree.iterparse(
            source,
            events=("start", "end"),
            tag=_FILTER,
            resolve_entities=False,
            no_network=True,
            load_dtd=False,
            dtd_validation=False,
            huge_tree=False,
            remove_comments=True,
            remove_pis=True,
        )
        for event, el in events:
            tag = _local(el.tag)
            if event == "start":
                reader.start(el, tag)
                continue
            reader.end(el, tag)
            if tag == "Set" or tag in FREE_TAGS or tag in _CLEAR_ON_END:
                # Free what is read: this element's children and its finished siblings.
                el.clear(keep_tail=False)
                parent = el.getparent()
                if parent is not None:
                    while el.getprevious() is not None:
                        del parent[0]
    except etree.XMLSyntaxError as exc:
        raise DesignFileError(f"the XML is broken: {_syntax_message(exc)}") from None
    except OSError as exc:
        raise DesignFileError(f"cannot read the file: {exc}") from None
    if not reader.units:
        raise DesignFileError(
            "the file has no Ecad CadHeader with units, so it carries no board data "
            "(layers, stack-up, drills) to import"
        )
    return Design(
        revision=reader.revision,
        units=reader.units,
        exporter=reader.exporter,
        function_mode=reader.function_mode,
        layers=reader.layers,
        stackups=reader.stackups,
        specs=reader.specs,
        steps=reader.steps,
    )


#: Read elements that are also freed when they close (their content is read by then).
_CLEAR_ON_END: Final = frozenset(
    {"Spec", "Layer", "StackupLayer", "LayerFeature", "LayerHole", "Hole", "StepRepeat"}
)
