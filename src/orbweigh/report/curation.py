"""Figures of a batch system for its curator: the catalogued orbit beside the new one.

Both draw from a batch record (``batch.process_system``): ``previous`` (the catalogued
elements), ``revision`` (the O-C of every measurement against them and the catalogue
orbit's last epoch) and, when the system was refitted, ``document`` (the new fit). The new
orbit is drawn by ``figures.plot_orbit`` / ``figures.plot_residuals``; this module adds the
catalogued orbit in the verdict's colour (``style.VERDICT_PALETTE``), dashed, and marks the
new measurements (those after the catalogue orbit's last epoch).
"""
from __future__ import annotations

import numpy as np

from ..elements import CampbellElements
from ..ephemeris import ephemeris
from ..reductions import from_julian_year
from . import figures as fg
from . import style

__all__ = ["VERDICT_MARKS", "verdict_class", "previous_elements", "plot_sky_old_and_new",
           "plot_residuals_old_and_new"]

#: A shape beside each verdict's colour, so that no verdict is told by colour alone.
VERDICT_MARKS = {"contradicted": "\N{HEAVY MULTIPLICATION X}",
                 "drifting": "\N{BLACK UP-POINTING TRIANGLE}",
                 "consistent": "\N{BLACK CIRCLE}", "failed": "\N{BLACK SQUARE}",
                 "other": "\N{WHITE CIRCLE}"}
_OLD_DASHES = (0, (6, 2.5))
_TRACK_POINTS = 721


def verdict_class(verdict, status):
    """'contradicted', 'drifting', 'consistent', 'failed' or 'other' (no previous orbit,
    no new data): the palette class of a system.  A failure keeps a verdict reached before
    it (a contradicted orbit whose refit failed is still contradicted)."""
    if verdict in ("contradicted", "drifting"):
        return verdict
    if status == "failed":
        return "failed"
    return verdict if verdict == "consistent" else "other"


def previous_elements(record):
    """The record's catalogued orbit as ``CampbellElements`` (T a Julian year), or None."""
    previous = record.get("previous")
    return None if not previous else CampbellElements.from_keys(previous["elements"])


def _old_colour(record):
    return style.VERDICT_PALETTE[verdict_class(record.get("verdict"), record.get("status"))]


def _new_mask(rows, last_epoch_yr):
    return (np.ones(len(rows), bool) if last_epoch_yr is None
            else np.array([r["epoch_yr"] > last_epoch_yr for r in rows], bool))


def plot_sky_old_and_new(record, ax=None):
    """The new orbit (``figures.plot_orbit``) with the catalogued orbit and the new points.

    Drawn on top of the new orbit: the catalogued orbit's track over one period (dashed,
    gid 'previous orbit'), its predicted positions at the new measurements' epochs
    (gid 'previous orbit at new epochs') joined to them by dotted lines, and a square
    around each new measurement (gid 'new measurements'). Needs ``record['document']``.

    Returns
    -------
    matplotlib Axes
        Same axes and units as ``figures.plot_orbit``.
    """
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D
    doc = record["document"]
    with style.figure_style():
        if ax is None:
            _, ax = style.new_figure(style.SINGLE_COLUMN_IN * 1.4, 5.6)
        fg.plot_orbit(doc, ax=ax)
        unit, scale = fg.orbit_unit(doc)
        old, colour = previous_elements(record), _old_colour(record)
        rows = fg.measurement_rows(doc)
        rev = record.get("revision")     # none: no catalogued orbit, so nothing is new
        last = (rev or {}).get("last_epoch_yr")
        new = np.isfinite(rows["x_obs"]) & (rows["status"] != "excluded") & bool(rev) & (
            True if last is None else rows["epoch_yr"] > last)
        handles = list(ax.get_legend().legend_handles)
        if old is not None:
            t = old.periastron_yr + np.linspace(0.0, old.period_yr, _TRACK_POINTS)
            track = ephemeris(old, t)
            ax.plot(track.y_arcsec * scale, track.x_arcsec * scale, color=colour, lw=1.3,
                    ls=_OLD_DASHES, zorder=2, gid="previous orbit")
            at = ephemeris(old, rows["epoch_yr"][new])
            segs = np.stack([np.column_stack([rows["y_obs"][new], rows["x_obs"][new]]),
                             np.column_stack([at.y_arcsec, at.x_arcsec])], axis=1) * scale
            ax.add_collection(LineCollection(segs, colors=colour, linewidths=0.6,
                                             linestyles=":", zorder=3))
            ax.plot(at.y_arcsec * scale, at.x_arcsec * scale, marker="x", ms=4.0, mew=1.0,
                    color=colour, ls="none", zorder=5, gid="previous orbit at new epochs")
            handles += [Line2D([], [], color=colour, lw=1.3, ls=_OLD_DASHES,
                               label="catalogued orbit"),
                        Line2D([], [], color=colour, marker="x", ls="none", mew=1.0,
                               label="catalogued orbit at the new epochs")]
        if new.any():
            ax.plot(rows["y_obs"][new] * scale, rows["x_obs"][new] * scale, marker="s",
                    ms=8.0, mfc="none", mec=style.INK, mew=0.8, ls="none", zorder=4,
                    gid="new measurements")
            handles.append(Line2D([], [], marker="s", ms=8.0, mfc="none", mec=style.INK,
                                  mew=0.8, ls="none", label=_new_label(record)))
        ax.autoscale_view()
        ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=2,
                  handlelength=2.2, columnspacing=1.0)
    return ax


def _new_label(record):
    last = (record.get("revision") or {}).get("last_epoch_yr")
    return "new measurement" if last is None else "new (after the catalogue's last data)"


def plot_residuals_old_and_new(record):
    """O-C against the catalogued orbit (left) and against the new fit (right).

    Left column: Delta theta and Delta rho of every measurement about the catalogued orbit
    (``record['revision']['residuals']``), new measurements filled, older ones hollow.
    Right column (when refitted): ``figures.plot_residuals`` of the new fit. The epochs
    after the catalogue orbit's last data are shaded in both.

    Returns
    -------
    matplotlib Figure
    """
    doc = record.get("document")
    rev = record["revision"]
    with style.figure_style():
        fig, axes = style.new_figure(style.DOUBLE_COLUMN_IN, 4.2, nrows=2, ncols=2 if doc else 1,
                                     sharex=True, squeeze=False)
        unit, scale = fg.orbit_unit(doc) if doc else ("arcsec", 1.0)
        to_axis, epoch_text = _epoch_axis(record)
        _draw_old_residuals(axes[:, 0], rev, _old_colour(record), unit, scale, to_axis)
        axes[1, 0].set_xlabel(epoch_text)
        if doc:
            fg.plot_residuals(doc, axes=(axes[0, 1], axes[1, 1]))
            axes[0, 1].set_title("against the new fit")
        last = rev.get("last_epoch_yr")
        if last is not None:
            newest = max(last, *[r["epoch_yr"] for r in rev["residuals"]])
            for ax in axes.ravel():
                ax.axvspan(to_axis(last), to_axis(newest), color=_old_colour(record),
                           alpha=0.10, lw=0, zorder=0, gid="new epochs")
                ax.axvline(to_axis(last), color=_old_colour(record), lw=0.8, ls="--", zorder=1)
    return fig


def _epoch_axis(record):
    """(Julian year -> axis value, axis label) in the log's own epoch scale.

    The same offset and label as ``figures.plot_residuals`` gives the new fit's column
    (both columns hold the epochs of one log), so the shared axis reads one scale.
    """
    scale = record.get("epoch_scale") or "julian"
    julian = np.array([r["epoch_yr"] for r in record["revision"]["residuals"]], float)
    offset, label = fg.epoch_axis(from_julian_year(julian, scale), scale)
    return (lambda years: from_julian_year(np.asarray(years, float), scale) - offset), label


def _draw_old_residuals(axes, rev, colour, unit, scale, to_axis):
    ax_t, ax_r = axes
    rows = rev["residuals"]
    new = _new_mask(rows, rev.get("last_epoch_yr"))
    voting = np.array([r["status"] == "used" for r in rows], bool)
    t = to_axis([r["epoch_yr"] for r in rows])
    for ax, key, factor in ((ax_t, "d_theta_deg", 1.0), (ax_r, "d_rho_arcsec", scale)):
        values = np.array([r[key] for r in rows], float) * factor
        ax.axhline(0.0, color=style.NODES, lw=0.7, zorder=1)
        for mask, face, label, gid in (
                (new & voting, colour, "new", "new O-C against the catalogued orbit"),
                (~new & voting, "none", "older", "older O-C against the catalogued orbit"),
                (~voting, "none", "excluded by the log", "excluded O-C")):
            if mask.any():
                ax.plot(t[mask], values[mask], marker="o", ms=4.0, mfc=face,
                        mec=colour if voting[mask].all() else style.NODES, mew=0.9,
                        ls="none", zorder=3, label=label, gid=gid)
    ax_t.set_title("against the catalogued orbit")
    ax_t.set_ylabel(r"O$-$C in $\theta$ [deg]")
    ax_r.set_ylabel(rf"O$-$C in $\rho$ [{unit}]")
    ax_t.legend(loc="best", handlelength=1.0)
