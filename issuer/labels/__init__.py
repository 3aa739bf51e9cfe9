"""Labels that scan: layouts in physical units, barcode symbols, PDF sheets and single
PNG/SVG labels.

The pure label layer: it knows nothing of the register. A caller turns register rows
into :class:`LabelContent` and calls :func:`render_labels` (or :func:`render_sheet`,
:func:`render_png`, :func:`render_svg`) with a :class:`Layout` from :func:`get_layout`.
reportlab and pypdfium2 are imported only when something is rendered.
"""

from issuer.labels.barcodes import (
    GS1_SYMBOLOGIES,
    QUIET_ZONE,
    SYMBOLOGIES,
    Symbol,
    encode,
    gs1_giai,
)
from issuer.labels.job import LabelContent, Placement, prepare
from issuer.labels.layouts import (
    PRESETS,
    Box,
    Layout,
    available_layouts,
    get_layout,
    layout_from_table,
    user_layouts,
)
from issuer.labels.render import (
    FORMATS,
    PRINT_NOTE,
    RenderResult,
    output_format,
    render_labels,
    render_page_png,
    render_png,
    render_sheet,
    render_svg,
)

__all__ = [
    "FORMATS",
    "GS1_SYMBOLOGIES",
    "PRESETS",
    "PRINT_NOTE",
    "QUIET_ZONE",
    "SYMBOLOGIES",
    "Box",
    "LabelContent",
    "Layout",
    "Placement",
    "RenderResult",
    "Symbol",
    "available_layouts",
    "encode",
    "get_layout",
    "gs1_giai",
    "layout_from_table",
    "output_format",
    "prepare",
    "render_labels",
    "render_page_png",
    "render_png",
    "render_sheet",
    "render_svg",
    "user_layouts",
]
