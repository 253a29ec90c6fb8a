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
           "PERIASTRON", "STATUS_STYLE", "VERDICT_PALETTE", "technique_styles", "figure_style", "new_figure",
           "save_figure", "angular_unit"]

SINGLE_COLUMN_IN = 3.4
DOUBLE_COLUMN_IN = 7.0

#: Neutral colours for the orbit's own geometry.
INK = "#22313f"
ORBIT = "#22313f"
BAND = "#7a9cc6"
NODES = "#8c8c8c"
PERIASTRON = "#c0392b"

#: Colour of each verdict class of a batch (``report.curation.verdict_class``): Paul Tol's
#: high-contrast scheme (blue, yellow, red; "Colour Schemes", SRON/EPS/TN/09-002, 2021, from
#: memory), distinct to colour-blind readers and in grey scale, plus black and grey. Pages
#: set a shape beside each colour (``curation.VERDICT_MARKS``), never the colour alone.
VERDICT_PALETTE = {"consistent": "#004488", "drifting": "#DDAA33", "contradicted": "#BB5566",
                   "failed": "#000000", "other": "#888888"}

# Technique styles are dealt out in this order to the techniques sorted by name, so the
# same log always gets the same look in every figure.
_PALETTE = ("#1f5f8b", "#e07b39", "#3a8f5c", "#8a4f9e", "#b8860b", "#4d6d7a", "#c2185b",
            "#6b8e23")
_MARKERS = ("o", "D", "s", "^", "v", "p", "h", "<")

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

_RC = {
    "font.size": 8.0,
    "axes.labelsize": 8.0,
    "axes.titlesize": 8.5,
    "xtick.labelsize": 7.0,
    "ytick.labelsize": 7.0,
    "legend.fontsize": 6.5,
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
    """Colour and marker for each technique name.

    Parameters
    ----------
    techniques : iterable of str
        Technique names as they appear in the residual rows.

    Returns
    -------
    dict
        {technique: {"color": str, "marker": str}}, assigned in sorted-name order.
    """
    names = sorted({str(t) for t in techniques})
    return {name: {"color": _PALETTE[k % len(_PALETTE)], "marker": _MARKERS[k % len(_MARKERS)]}
            for k, name in enumerate(names)}


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


def save_figure(fig, stem, formats):
    """Write ``fig`` as ``<stem>.<fmt>`` for each format; returns {filename: Path}."""
    stem = Path(stem)
    written = {}
    with figure_style():
        for fmt in formats:
            path = stem.with_suffix(f".{fmt}")
            buffer = io.BytesIO()
            fig.savefig(buffer, format=fmt, metadata=_metadata(fmt))
            write_atomic(path, buffer.getvalue())
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
