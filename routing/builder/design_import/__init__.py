"""Design import: an IPC-2581 file (revision B, B1 or C) read into a draft build spec.

Pure core (no Django imports), beside the routing builder because its output is the
builder's own build spec and it reuses the builder's shop rules (microvia depth,
lamination). `reader` streams the XML into plain dataclasses in bounded memory and
refuses XML attacks; `mapping` turns what the file states into spec keys, says what
the file does not state ("to fill in") and warns about what looks wrong; `svg` draws
the stack-up as a cross-section.
"""

from .mapping import TO_FILL_MARK, ImportResult, import_design, missing_fields
from .reader import SUPPORTED_REVISIONS, Design, DesignFileError, read_design
from .svg import cross_section_svg

__all__ = [
    "SUPPORTED_REVISIONS",
    "TO_FILL_MARK",
    "Design",
    "DesignFileError",
    "ImportResult",
    "cross_section_svg",
    "import_design",
    "missing_fields",
    "read_design",
]
