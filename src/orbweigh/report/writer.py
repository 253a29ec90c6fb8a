"""Write a whole report of a result document: figures, HTML, LaTeX and ECSV tables."""
from __future__ import annotations

from pathlib import Path

from ..errors import InputError
from ..files import check_folder, replace_folder, write_atomic, write_table
from . import figures as fg
from . import style
from .html import render_html
from .posterior import mass_draws, posterior_draws
from .tables import elements_latex, residuals_table

__all__ = ["FIGURE_FORMATS", "write_report", "check_report_folder"]

FIGURE_FORMATS = ("png", "svg", "pdf")

_CAPTIONS = {
    "orbit": "Apparent orbit on the sky (North up, East left), primary at the origin. Lines "
             "join each measurement to its predicted position; thin lines are orbits drawn "
             "from the posterior (or the covariance).",
    "residuals": "Residuals (observed minus computed) in position angle and separation, with "
                 "the measurement uncertainties as used in the fit (left), and the same in "
                 "units of each point's uncertainty (right). A point beyond an axis sits on "
                 "its edge with its value written beside it.",
    "corner_elements": "Posterior of the seven elements (contours at 1 and 2 sigma; "
                       "dashed: 16th, 50th, 84th percentiles; red: best fit).",
    "corner_masses": "Posterior of the total mass with the parallax, semi-major axis and "
                     "period it follows from (the parallax sampled with the elements from its "
                     "Gaussian prior, or drawn from its measurement for a posterior without it).",
    "mass_histogram": "Total mass of the posterior draws: median, 68 % and 95 % intervals "
                      "of the plotted draws.",
    "radial_velocity": "Radial velocities of each component against the orbital phase (left, "
                       "0 at periastron; for a circular orbit at T, the node passage when "
                       "\u03c9 = 0) and against time (right, in the velocity log's "
                       "scale), with the combined solution's model curves and the systemic "
                       "velocity (dashed); observed minus computed below. Error bars: the "
                       "velocity errors as used; hollow points are excluded by the log.",
}


def _figures(doc, seed):
    """{name: Figure} of every figure the document supports."""
    figs = {"orbit": fg.plot_orbit(doc, seed=seed).figure}
    if fg.measurement_rows(doc)["line"].size:
        figs["residuals"] = fg.plot_residuals(doc)[0].figure
    if fg.velocity_rows(doc)["line"].size:
        figs["radial_velocity"] = fg.plot_radial_velocities(doc)["phase"].figure
    draws = posterior_draws(doc, seed)
    if draws is not None:
        figs["corner_elements"] = fg.plot_corner_elements(doc, draws)
        # A dynamical parallax is not a measurement to draw from: no mass figures then.
        dynamical = (doc.get("parallax") or {}).get("kind") == "dynamical"
        masses = None if dynamical else mass_draws(doc, draws, seed)
        if masses is not None and len(masses["mass_msun"]) > 1:
            figs["corner_masses"] = fg.plot_corner_masses(masses)
            figs["mass_histogram"] = fg.plot_mass_histogram(masses).figure
    return figs


_TABLES = ("report.html", "elements.tex", "residuals.ecsv")


def check_report_folder(out_dir, keep=()):
    """Refuse, before any work, a report folder ``write_report`` would refuse."""
    check_folder(out_dir, keep, _owned)


def _owned(name):
    """Whether ``name`` is a file a report writes (a folder holding others is refused)."""
    stem, _, fmt = name.rpartition(".")
    return name in _TABLES or (stem in _CAPTIONS and fmt in FIGURE_FORMATS)


def _draws_file(doc):
    name = (doc.get("posterior") or {}).get("draws_file") if isinstance(doc, dict) else None
    return Path(doc.get("_path", ".")).parent / str(name) if name else None


def _png_bytes(fig, written, name):
    if f"{name}.png" in written:
        return written[f"{name}.png"].read_bytes()
    return style.figure_bytes(fig, "png")


def write_report(doc, out_dir, formats=FIGURE_FORMATS, seed=None, keep=(), name=None):
    """Write the report of a result document into ``out_dir``.

    Parameters
    ----------
    doc : dict
        Result document (``result.load_result``).
    out_dir : str or Path
        Directory, created when missing.
    formats : sequence of str
        Figure file formats, any of 'png', 'svg', 'pdf' (the HTML embeds PNG regardless).
    seed : int, optional
        Seed of the figures' random draws (posterior band, subsampling, parallax draws);
        default the document's seed. It is printed in the report.
    keep : iterable of path, optional
        Files the run still needs (its inputs, its other outputs): ``out_dir`` is replaced
        as a whole, so a folder holding one of them is refused. The document and its draws
        file are always kept.
    name : str, optional
        The object's name in the page's title and the LaTeX caption (default: the
        document's "name", else the log's file stem).

    Returns
    -------
    dict
        {file name: Path} of every file written: ``report.html``, ``elements.tex``,
        ``residuals.ecsv`` and ``<figure>.<format>`` for each figure.
    """
    from .. import __version__
    bad = [f for f in formats if f not in FIGURE_FORMATS]
    if bad:
        raise InputError(f"unknown figure format(s) {', '.join(map(repr, bad))}; "
                         f"choose from {', '.join(FIGURE_FORMATS)}")
    out = Path(out_dir)
    seed = int(doc.get("seed", 0) if seed is None else seed)
    figures = _figures(doc, seed)
    keep = [*keep, doc.get("_path"), _draws_file(doc)]
    with replace_folder(out, keep, _owned) as build:   # a failure leaves the old folder
        written, embedded = {}, {}
        for figure, fig in figures.items():
            files = style.save_figure(fig, build / figure, formats)
            written.update(files)
            embedded[figure] = (_CAPTIONS[figure], _png_bytes(fig, files, figure))
        write_atomic(build / "elements.tex", elements_latex(doc, name))
        write_table(build / "residuals.ecsv", residuals_table(doc))
        write_atomic(build / "report.html", render_html(doc, embedded, seed, __version__, name))
        written.update({n: build / n for n in _TABLES})
    written = {n: out / n for n in written}
    return written
