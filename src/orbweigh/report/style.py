"""The look of orbweigh's figures: palette, marker choices, sizes and saving.

One place decides colours, markers and fonts so that every figure of a report reads the
same. Sizes follow journal columns (3.4 in single, 7.0 in double column); fonts are sized
to stay legible when a figure is printed at that width.
"""
from __future__ import annotations

import contextlib
import io
from pathlib import Path

from ..files import write_atomic

__all__ = ["SINGLE_COLUMN_IN", "DOUBLE_COLUMN_IN", "INK", "ORBIT", "BAND", "NODES",
           "PERIASTRON", "STATUS_STYLE", "VERDICT_PALETTE", "TECHNIQUE_STYLE",
           "OTHER_TECHNIQUE_COLORS", "OTHER_TECHNIQUE_MARKERS", "COMPONENT_STYLE", "KEY_ROW_PT",
           "KEY_FONT_PT", "technique_styles", "figure_style", "new_figure", "new_mosaic",
           "save_figure", "figure_bytes", "angular_unit"]

SINGLE_COLUMN_IN = 3.4
DOUBLE_COLUMN_IN = 7.0

#: Neutral colours for the orbit's own geometry.
INK = "#22313f"
ORBIT = "#22313f"
BAND = "#7a9cc6"
NODES = "#8c8c8c"
PERIASTRON = "#c0392b"

#: Colour of each verdict class of a batch (``report.curation.verdict_class``): orbweigh's
#: own, picked within the hue a curator expects (consistent green-teal, drifting amber,
#: contradicted red) by scripts/pick_verdict_colours.py for the largest smallest CIEDE2000
#: difference (18.1) in normal vision and under simulated deuteranopia, protanopia and
#: tritanopia, with near-black and grey for the neutral classes; tests/test_style.py keeps
#: it above 15. Pages set a shape beside each colour (``curation.VERDICT_MARKS``).
VERDICT_PALETTE = {"consistent": "#3cc3d2", "drifting": "#f0a53c", "contradicted": "#b40000",
                   "failed": "#262630", "other": "#8a8a8a"}

#: The fixed look of each technique orbweigh knows (the keys of
#: ``measurements.TECHNIQUE_DEFAULTS``): the same colour and marker in every report and batch
#: page, whatever else the log holds. Colours are orbweigh's own, picked by a farthest-point
#: search over an sRGB grid (L* 35-75, C* > 30) for the largest smallest CIEDE2000
#: difference in normal vision and under simulated deuteranopia, protanopia and tritanopia
#: (Machado, Oliveira & Fernandes 2009, severity 1) by scripts/pick_technique_colours.py
#: (smallest difference 17.0); tests/test_style.py checks it stays above 15.
#: Every technique also has its own marker, so colour is never the only cue.
TECHNIQUE_STYLE = {
    "micrometer": {"color": "#873c2d", "marker": "o"},
    "photographic": {"color": "#788700", "marker": "s"},
    "speckle": {"color": "#0f7869", "marker": "D"},
    "adaptive_optics": {"color": "#693ca5", "marker": "^"},
    "space": {"color": "#5ac3e1", "marker": "v"},
}
#: Looks for technique names orbweigh does not know, dealt out to those names in sorted
#: order; past the last one the colours repeat, each time with new markers.
OTHER_TECHNIQUE_COLORS = ("#e19696", "#a5c300", "#a55aff")
OTHER_TECHNIQUE_MARKERS = ("P", "X", "h", "p", "*", "<", ">", "8", "H")

#: How each residual status is drawn. ``face``: 'fill' uses the technique colour,
#: 'none' leaves the marker hollow; ``ring``: an extra outline around the marker;
#: ``edge`` (optional) replaces the technique colour on the marker's outline.
STATUS_STYLE = {
    "used": {"face": "fill", "ring": None, "alpha": 0.9, "label": "used"},
    "flipped": {"face": "fill", "ring": "#111111", "alpha": 0.9,
                "label": "flipped (180\N{DEGREE SIGN} corrected)"},
    "outlier": {"face": "none", "ring": "#d62728", "alpha": 1.0, "label": "outlier"},
    "excluded": {"face": "none", "ring": None, "edge": "#9a9a9a", "alpha": 1.0,
                 "label": "excluded by the log"},
}

#: Radial-velocity components: 1 the primary, 2 the secondary (two of the technique
#: colours above, so they too stay apart under colour-vision deficiencies).
COMPONENT_STYLE = {
    1: {"color": "#0f7869", "marker": "o", "label": "primary (component 1)"},
    2: {"color": "#873c2d", "marker": "s", "label": "secondary (component 2)"},
}

#: Height of one row of a figure's key [points] (legend font and marker, with spacing).
KEY_ROW_PT = 11.0
#: Font size of a figure's key [points] (the rcParams legend size below).
KEY_FONT_PT = 6.5

_RC = {
    "font.size": 8.0,
    "axes.labelsize": 8.0,
    "axes.titlesize": 8.5,
    "xtick.labelsize": 7.0,
    "ytick.labelsize": 7.0,
    "legend.fontsize": KEY_FONT_PT,
    "axes.linewidth": 0.7,
    "xtick.direction": "in",
    "ytick.direction": "in",
    "xtick.top": True,
    "ytick.right": True,
    "xtick.major.width": 0.7,
    "ytick.major.width": 0.7,
    "lines.linewidth": 1.0,
    "lines.markersize": 4.0,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "xtick.color": INK,
    "ytick.color": INK,
    "legend.frameon": False,
    "savefig.dpi": 200,
    "pdf.fonttype": 42,       # TrueType in PDFs, as journals ask
    "svg.fonttype": "none",   # SVG text stays text: small and searchable
    "axes.formatter.useoffset": False,
}


def technique_styles(techniques):
    """Colour and marker for each technique of a figure.

    Parameters
    ----------
    techniques : iterable of str
        Techniques as the residual rows group them: a ``TECHNIQUE_STYLE`` key for a known
        technique, the name as written for any other.

    Returns
    -------
    dict
        {technique: {"color": str, "marker": str}}: known techniques from
        ``TECHNIQUE_STYLE``, the others from ``OTHER_TECHNIQUE_COLORS`` and
        ``OTHER_TECHNIQUE_MARKERS`` in sorted-name order.
    """
    names = {str(t) for t in techniques}
    styles = {name: dict(TECHNIQUE_STYLE[name]) for name in names if name in TECHNIQUE_STYLE}
    others = sorted(names - set(styles))
    for k, name in enumerate(others):
        styles[name] = {"color": OTHER_TECHNIQUE_COLORS[k % len(OTHER_TECHNIQUE_COLORS)],
                        "marker": OTHER_TECHNIQUE_MARKERS[k % len(OTHER_TECHNIQUE_MARKERS)]}
    return styles


@contextlib.contextmanager
def figure_style():
    """Context in which matplotlib draws (and saves) with orbweigh's look."""
    import matplotlib
    with matplotlib.rc_context(_RC):
        yield


def new_figure(width_in=SINGLE_COLUMN_IN, height_in=None, **subplots):
    """A backend-free matplotlib Figure and its axes (``Figure.subplots`` arguments).

    Works without pyplot, so report writing never opens windows and is safe in threads.
    """
    from matplotlib.figure import Figure
    fig = Figure(figsize=(width_in, height_in or width_in), layout="constrained")
    return fig, fig.subplots(**subplots)


def new_mosaic(width_in, height_in, layout, **mosaic):
    """A backend-free Figure and its named axes (``Figure.subplot_mosaic`` arguments)."""
    from matplotlib.figure import Figure
    fig = Figure(figsize=(width_in, height_in), layout="constrained")
    return fig, fig.subplot_mosaic(layout, **mosaic)


def figure_bytes(fig, fmt="png", **savefig):
    """``fig`` rendered as ``fmt`` in the house style with fixed metadata (``savefig``:
    further ``Figure.savefig`` options, e.g. ``bbox_inches``)."""
    buffer = io.BytesIO()
    with figure_style():
        fig.savefig(buffer, format=fmt, metadata=_metadata(fmt), **savefig)
    return buffer.getvalue()


def save_figure(fig, stem, formats):
    """Write ``fig`` as ``<stem>.<fmt>`` for each format; returns {filename: Path}."""
    stem = Path(stem)
    written = {}
    for fmt in formats:
        path = stem.with_name(f"{stem.name}.{fmt}")   # 'orbit.v2' -> 'orbit.v2.png'
        write_atomic(path, figure_bytes(fig, fmt))
        written[path.name] = path
    return written


def _metadata(fmt):
    # Fixed metadata: no creation dates, so reruns give identical files.
    if fmt == "png":
        return {"Software": "orbweigh"}
    if fmt == "pdf":
        return {"Creator": "orbweigh", "CreationDate": None}
    if fmt == "svg":
        return {"Creator": "orbweigh", "Date": None}
    return None


def angular_unit(extent_arcsec):
    """('arcsec', 1.0) or ('mas', 1000.0): mas when the orbit spans less than 0.1 arcsec."""
    return ("mas", 1000.0) if extent_arcsec < 0.1 else ("arcsec", 1.0)
