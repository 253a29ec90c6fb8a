"""Figures of an orbit solution: the apparent orbit, residuals, posterior corner plots, mass.

Every function draws from a result document (schema ``orbweigh.result/1``) so that a saved
fit can be redrawn at any time. Plot functions take ``ax=None`` (a new single-column
figure is made) and return what they drew on. Sky convention: North up, East to the LEFT;
x = rho cos theta is North (vertical axis), y = rho sin theta is East (horizontal axis,
inverted).
"""
from __future__ import annotations

import numpy as np

from ..elements import thiele_innes_from_campbell
from ..result import element_draws, elements_from_document
from . import style

__all__ = ["measurement_rows", "plot_orbit", "plot_residuals", "plot_corner_elements",
           "plot_corner_masses", "plot_mass_histogram", "orbit_unit"]

_E_GRID = np.linspace(0.0, 2.0 * np.pi, 361)
_ELEMENT_LABELS = (r"$P$ [yr]", r"$T$ [Julian yr]", r"$e$", r"$a$ [arcsec]", r"$i$ [deg]",
                   r"$\Omega$ [deg]", r"$\omega$ [deg]")


def _ellipses(elements):
    """x, y [arcsec] of apparent ellipses; ``elements`` has shape (7,) or (n, 7)."""
    el = np.atleast_2d(np.asarray(elements, float))
    e, a = el[:, 2:3], el[:, 3:4]
    A, B, F, G = thiele_innes_from_campbell(a, *np.radians([el[:, 4:5], el[:, 5:6], el[:, 6:7]]))
    X = np.cos(_E_GRID) - e
    Y = np.sqrt(1.0 - e**2) * np.sin(_E_GRID)
    return A * X + F * Y, B * X + G * Y


def orbit_unit(doc):
    """('arcsec', 1.0) or ('mas', 1000.0) for the fitted orbit of ``doc``."""
    x, y = _ellipses(elements_from_document(doc).as_tuple())
    return style.angular_unit(float(np.max(np.hypot(x, y))))


def _float(value):
    return np.nan if value is None else float(value)


def measurement_rows(doc):
    """Plottable residual rows (all but 'rejected') as a dict of arrays.

    Observed positions of flipped rows are given after the 180 deg correction, as fitted.

    Returns
    -------
    dict
        line, epoch_yr, technique, status; x_obs, y_obs, x_pred, y_pred [arcsec];
        d_theta_deg, d_rho_arcsec, sigma_theta_deg, sigma_rho_arcsec.
    """
    rows = [r for r in doc.get("residuals", []) if r.get("status") != "rejected"]
    get = lambda key: np.array([_float(r.get(key)) for r in rows], float)  # noqa: E731
    status = np.array([r.get("status", "used") for r in rows], dtype=object)
    theta = np.radians(get("theta_deg") + np.where(status == "flipped", 180.0, 0.0))
    rho, theta_p = get("rho_arcsec"), np.radians(get("theta_pred_deg"))
    rho_p = get("rho_pred_arcsec")
    technique = [str(r.get("technique") or "unknown") for r in rows]
    return {"line": np.array([r.get("line") for r in rows]), "epoch_yr": get("epoch_yr"),
            "technique": np.array(technique, dtype=object),
            "status": status,
            "x_obs": rho * np.cos(theta), "y_obs": rho * np.sin(theta),
            "x_pred": rho_p * np.cos(theta_p), "y_pred": rho_p * np.sin(theta_p),
            "d_theta_deg": get("d_theta_deg"), "d_rho_arcsec": get("d_rho_arcsec"),
            "sigma_theta_deg": get("sigma_theta_deg"), "sigma_rho_arcsec": get("sigma_rho_arcsec")}


def _marker_kwargs(tech_style, status):
    st = style.STATUS_STYLE.get(status, style.STATUS_STYLE["used"])
    face = tech_style["color"] if st["face"] == "fill" else "none"
    return {"marker": tech_style["marker"], "mfc": face, "mec": st.get("edge", tech_style["color"]),
            "mew": 0.9, "alpha": st["alpha"], "linestyle": "none"}


def _groups(rows):
    """(technique, status, mask) for each combination present."""
    for tech in sorted(set(rows["technique"])):
        for status in style.STATUS_STYLE:
            mask = (rows["technique"] == tech) & (rows["status"] == status)
            if mask.any():
                yield tech, status, mask


def _draw_measurements(ax, rows, styles, scale):
    from matplotlib.collections import LineCollection
    # O-C segments first so that markers sit on top of them.
    segs = np.stack([np.column_stack([rows["y_obs"], rows["x_obs"]]),
                     np.column_stack([rows["y_pred"], rows["x_pred"]])], axis=1) * scale
    ok = np.all(np.isfinite(segs), axis=(1, 2))
    ax.add_collection(LineCollection(segs[ok], colors="#555555", linewidths=0.6, zorder=3,
                                     gid="o-c lines"))
    for tech, status, mask in _groups(rows):
        kw = _marker_kwargs(styles[tech], status)
        ax.plot(rows["y_obs"][mask] * scale, rows["x_obs"][mask] * scale, zorder=4,
                gid=f"measurements {tech} {status}", **kw)
        ring = style.STATUS_STYLE[status]["ring"]
        if ring:
            ax.plot(rows["y_obs"][mask] * scale, rows["x_obs"][mask] * scale, marker="o",
                    ms=2.1 * kw.get("ms", 4.0), mfc="none", mec=ring, mew=0.8,
                    linestyle="none", zorder=4)


def _legend_handles(rows, styles):
    from matplotlib.lines import Line2D
    handles = [Line2D([], [], label=tech, **_marker_kwargs(styles[tech], "used"))
               for tech in sorted(styles)]
    for status in ("flipped", "outlier", "excluded"):
        if np.any(rows["status"] == status):
            st = style.STATUS_STYLE[status]
            kw = _marker_kwargs({"color": "#777777", "marker": "o"}, status)
            if st["ring"]:
                kw.update(ms=6.5, mec=st["ring"])
            handles.append(Line2D([], [], label=st["label"], **kw))
    return handles


def _visible_proxy(handle):
    """A legend stand-in for the faint band of orbits, which would be invisible at its size."""
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D
    if not isinstance(handle, LineCollection):
        return handle
    return Line2D([], [], color=style.BAND, lw=2.0, alpha=0.6, label=handle.get_label())


def _draw_compass(ax):
    # N up and E left, drawn in the lower right corner in axes coordinates.
    origin, length = (0.93, 0.07), 0.10
    arrow = {"arrowstyle": "-|>", "color": style.INK, "lw": 0.8}
    ax.annotate("N", xy=origin, xytext=(origin[0], origin[1] + length), xycoords="axes fraction",
                textcoords="axes fraction", ha="center", va="bottom", fontsize=7,
                arrowprops=dict(arrow, arrowstyle="<|-"))
    ax.annotate("E", xy=origin, xytext=(origin[0] - length, origin[1]), xycoords="axes fraction",
                textcoords="axes fraction", ha="right", va="center", fontsize=7,
                arrowprops=dict(arrow, arrowstyle="<|-"))


def plot_orbit(doc, ax=None, n_band=80, seed=None):
    """The apparent orbit on the sky with every measurement and its O-C line.

    Parameters
    ----------
    doc : dict
        Result document.
    ax : matplotlib Axes, optional
        Where to draw; a new single-column figure when None.
    n_band : int
        Number of posterior orbits drawn as a translucent band (posterior draws file, else
        the covariance; no band when the document has neither). 0 draws none.
    seed : int, optional
        Seed for choosing the band's draws; default the document's seed.

    Returns
    -------
    matplotlib Axes
        Horizontal axis: y = rho sin theta (East, increasing to the LEFT); vertical axis:
        x = rho cos theta (North, up), both in the unit of ``orbit_unit(doc)``.
    """
    from matplotlib.collections import LineCollection
    with style.figure_style():
        if ax is None:
            _, ax = style.new_figure(style.SINGLE_COLUMN_IN, 4.3)
        best = elements_from_document(doc)
        unit, scale = orbit_unit(doc)
        x, y = _ellipses(best.as_tuple())
        x, y = x[0] * scale, y[0] * scale
        seed = doc.get("seed", 0) if seed is None else seed
        draws = element_draws(doc, n_band, seed) if n_band else None
        if draws is not None and len(draws):
            bx, by = _ellipses(draws)
            lines = np.stack([by * scale, bx * scale], axis=-1)
            source = ("posterior orbits" if (doc.get("posterior") or {}).get("draws_file")
                      else "orbits from the covariance")
            ax.add_collection(LineCollection(lines, colors=style.BAND, linewidths=0.5,
                                             alpha=0.15, zorder=1, label=source,
                                             gid="posterior band"))
        reach = 1.08 * float(np.max(np.hypot(x, y)))
        node = np.radians(best.node_deg)
        ax.plot([-reach * np.sin(node), reach * np.sin(node)],
                [-reach * np.cos(node), reach * np.cos(node)], color=style.NODES, lw=0.7,
                ls=(0, (5, 3)), zorder=1, label="line of nodes", gid="line of nodes")
        ax.plot(y, x, color=style.ORBIT, lw=1.1, zorder=2, label="fitted orbit", gid="orbit")
        ax.plot([0, y[0]], [0, x[0]], color=style.PERIASTRON, lw=0.6, ls=":", zorder=2)
        ax.plot(y[0], x[0], marker="o", ms=5, mfc="white", mec=style.PERIASTRON, mew=1.2,
                linestyle="none", zorder=5, label="periastron", gid="periastron")
        # Eccentric anomaly grows with time, so the arrow E = pi -> pi + 0.3 shows the motion.
        k = np.searchsorted(_E_GRID, np.pi)
        ax.annotate("", xy=(y[k + 17], x[k + 17]), xytext=(y[k], x[k]), zorder=5,
                    gid="direction of motion",
                    arrowprops={"arrowstyle": "-|>,head_length=0.6,head_width=0.3",
                                "color": style.ORBIT, "lw": 1.4})
        rows = measurement_rows(doc)
        styles = style.technique_styles(rows["technique"])
        _draw_measurements(ax, rows, styles, scale)
        ax.plot(0, 0, marker="*", ms=9, color=style.INK, linestyle="none", zorder=6,
                label="primary", gid="primary")
        _draw_compass(ax)
        ax.set_aspect("equal", adjustable="datalim")
        ax.autoscale_view()
        ax.margins(0.08)
        ax.invert_xaxis()  # East to the left
        ax.set_xlabel(f"East offset, $\\rho\\,\\sin\\theta$ [{unit}]")
        ax.set_ylabel(f"North offset, $\\rho\\,\\cos\\theta$ [{unit}]")
        geometry = [_visible_proxy(h) for h in ax.get_legend_handles_labels()[0]]
        ax.legend(handles=geometry + _legend_handles(rows, styles), loc="upper center",
                  bbox_to_anchor=(0.5, -0.16), ncol=2, handlelength=1.8, columnspacing=1.0)
    return ax


def plot_residuals(doc, axes=None):
    """O-C in theta and rho against epoch, with the measurement error bars.

    Parameters
    ----------
    doc : dict
        Result document.
    axes : pair of matplotlib Axes, optional
        (theta axes, rho axes); a new single-column figure when None.

    Returns
    -------
    tuple of matplotlib Axes
        (theta axes [deg], rho axes [arcsec or mas, as ``orbit_unit``]); horizontal axis
        in decimal Julian years.
    """
    with style.figure_style():
        if axes is None:
            _, axes = style.new_figure(style.SINGLE_COLUMN_IN, 3.4, nrows=2, sharex=True)
        ax_t, ax_r = axes
        unit, scale = orbit_unit(doc)
        rows = measurement_rows(doc)
        styles = style.technique_styles(rows["technique"])
        for ax in axes:
            ax.axhline(0.0, color=style.NODES, lw=0.7, zorder=1)
        for tech, status, mask in _groups(rows):
            kw = _marker_kwargs(styles[tech], status)
            kw.update(ecolor=styles[tech]["color"], elinewidth=0.6, capsize=0, zorder=3)
            ax_t.errorbar(rows["epoch_yr"][mask], rows["d_theta_deg"][mask],
                          yerr=rows["sigma_theta_deg"][mask], label=tech, **kw)
            ax_r.errorbar(rows["epoch_yr"][mask], rows["d_rho_arcsec"][mask] * scale,
                          yerr=rows["sigma_rho_arcsec"][mask] * scale, **kw)
            ring = style.STATUS_STYLE[status]["ring"]
            for ax, values in ((ax_t, rows["d_theta_deg"]), (ax_r, rows["d_rho_arcsec"] * scale)):
                if ring:
                    ax.plot(rows["epoch_yr"][mask], values[mask], marker="o", ms=8.0,
                            mfc="none", mec=ring, mew=0.8, linestyle="none", zorder=4)
        ax_t.set_ylabel(r"O$-$C in $\theta$ [deg]")
        ax_r.set_ylabel(rf"O$-$C in $\rho$ [{unit}]")
        ax_r.set_xlabel("Epoch [Julian year]")
        ax_t.figure.legend(handles=_legend_handles(rows, styles), loc="outside upper center",
                           ncols=2, handlelength=1.5, columnspacing=0.8)
    return ax_t, ax_r


def _corner(data, labels, truths, fig):
    import corner
    with style.figure_style():
        if fig is None:
            from matplotlib.figure import Figure
            fig = Figure(figsize=(style.DOUBLE_COLUMN_IN, style.DOUBLE_COLUMN_IN))
        corner.corner(data, labels=labels, truths=truths, fig=fig, color=style.ORBIT,
                      truth_color=style.PERIASTRON, quantiles=(0.16, 0.5, 0.84),
                      plot_datapoints=False, fill_contours=True, levels=(0.393, 0.865),
                      smooth=1.0, bins=30, max_n_ticks=4, labelpad=0.12,
                      label_kwargs={"fontsize": 8}, hist_kwargs={"color": style.ORBIT})
        # corner sizes its margins for its own (larger) default figure; ours is narrower.
        fig.subplots_adjust(left=0.12, bottom=0.12, right=0.98, top=0.98)
        for ax in fig.axes:
            ax.tick_params(labelsize=6.5)
    return fig


def plot_corner_elements(doc, draws, fig=None):
    """Corner plot of the seven elements' posterior draws, best fit marked.

    Parameters
    ----------
    doc : dict
        Result document (for the best-fit elements).
    draws : ndarray, shape (n, 7)
        Posterior draws, internal units (see ``posterior.posterior_draws``).
    fig : matplotlib Figure, optional
        Empty figure to draw into; a new double-column figure when None.

    Returns
    -------
    matplotlib Figure
    """
    best = np.array(elements_from_document(doc).as_tuple())
    return _corner(np.asarray(draws, float), list(_ELEMENT_LABELS), list(best), fig)


def plot_corner_masses(masses, fig=None):
    """Corner plot of total mass, parallax, a and P for each posterior draw.

    Parameters
    ----------
    masses : dict
        Output of ``posterior.mass_draws``.
    fig : matplotlib Figure, optional
        Empty figure to draw into; a new double-column figure when None.

    Returns
    -------
    matplotlib Figure
    """
    data = np.column_stack([masses["mass_msun"], masses["parallax_mas"], masses["a_arcsec"],
                            masses["P_yr"]])
    labels = [r"$\mathcal{M}$ [M$_\odot$]", r"$\varpi$ [mas]", r"$a$ [arcsec]", r"$P$ [yr]"]
    return _corner(data, labels, None, fig)


def plot_mass_histogram(masses, ax=None):
    """Histogram of the total mass draws with the median and 68 % / 95 % intervals.

    Parameters
    ----------
    masses : dict
        Output of ``posterior.mass_draws``.
    ax : matplotlib Axes, optional
        Where to draw; a new single-column figure when None.

    Returns
    -------
    matplotlib Axes
        The intervals are the 16-84 and 2.5-97.5 percentiles of the plotted draws.
    """
    m = np.asarray(masses["mass_msun"], float)
    p025, p16, p50, p84, p975 = np.percentile(m, [2.5, 16, 50, 84, 97.5])
    with style.figure_style():
        if ax is None:
            _, ax = style.new_figure(style.SINGLE_COLUMN_IN, 2.5)
        lo, hi = np.percentile(m, [0.2, 99.8])
        ax.axvspan(p025, p975, color=style.BAND, alpha=0.22, lw=0, label="95 % interval",
                   gid="interval 95")
        ax.axvspan(p16, p84, color=style.BAND, alpha=0.45, lw=0, label="68 % interval",
                   gid="interval 68")
        bins = np.histogram_bin_edges(m, bins="auto", range=(lo, hi))  # Freedman-Diaconis/Sturges
        ax.hist(m, bins=bins, histtype="step", color=style.ORBIT, lw=0.9)
        ax.axvline(p50, color=style.PERIASTRON, lw=1.0, label="median", gid="median")
        ax.set_xlim(lo, hi)
        ax.set_xlabel(r"Total mass $\mathcal{M}$ [M$_\odot$]")
        ax.set_ylabel("Posterior draws")
        ax.legend(loc="upper right")
    return ax
