"""Figures of an orbit solution: the apparent orbit, residuals, posterior corner plots, mass,
radial velocities.

Every function draws from a result document (schema ``orbweigh.result/1``) so that a saved
fit can be redrawn at any time. Plot functions take ``ax=None`` (a new figure is made) and
return what they drew on. Sky convention: North up, East to the LEFT; x = rho cos theta is
North (vertical axis), y = rho sin theta is East (horizontal axis, inverted).

Techniques are shown by the name the log wrote ('_' read as a space, as the log reader
reads it); rows of one known technique share its fixed look (``style.TECHNIQUE_STYLE``),
and a name orbweigh does not know keeps its own look, its name and a note of the default
sigma it was given. Epochs on an axis are in the log's own scale and say which.
"""
from __future__ import annotations

import numpy as np

from .. import formatting as fmt
from ..elements import thiele_innes_from_campbell
from ..measurements import TECHNIQUE_DEFAULTS
from ..reductions import from_julian_year
from ..result import element_draws, elements_from_document, epoch_scale_of, t_is_node_passage
from . import style

__all__ = ["measurement_rows", "velocity_rows", "epoch_axis", "plot_orbit", "plot_residuals",
           "plot_corner_elements", "plot_corner_masses", "plot_mass_histogram",
           "plot_radial_velocities", "velocity_model", "orbit_unit"]

_E_GRID = np.linspace(0.0, 2.0 * np.pi, 361)
_FLAGS = ("flipped", "outlier", "excluded")
_KEY = {"handlelength": 1.3, "handletextpad": 0.4, "columnspacing": 1.1}  # in font sizes
_NOT_GIVEN = "technique not given"


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


def epoch_axis(epochs, scale):
    """(offset, axis label) for epochs written in ``scale``: plot ``epochs - offset``.

    Years are plotted as they are (offset 0); day counts (JD, MJD) from a round thousand,
    named in the label, so that the ticks stay short.
    """
    name = fmt.epoch_label(scale)
    finite = np.asarray(epochs, float)[np.isfinite(np.asarray(epochs, float))]
    if scale not in ("jd", "mjd") or not finite.size:
        return 0.0, f"Epoch [{name}]"
    offset = 1000.0 * np.floor(finite.min() / 1000.0)
    return offset, f"Epoch [{name} \N{MINUS SIGN} {offset:.0f}]"


def _epochs(rows, scale):
    """Each row's epoch in ``scale``: as the document wrote it, else from its Julian year."""
    given = np.array([_float(r.get("epoch")) for r in rows], float)
    julian = np.array([_float(r.get("epoch_yr")) for r in rows], float)
    missing = ~np.isfinite(given) & np.isfinite(julian)
    if missing.any():
        given[missing] = from_julian_year(julian[missing], scale)
    return given


def _technique_names(rows):
    """(group key, shown name) of each row: a known technique groups by its class."""
    keys, shown = [], []
    for r in rows:
        cls = str(r.get("technique") or "unknown")
        written = r.get("technique_text", cls)   # documents older than the written name
        name = " ".join(str(written).replace("_", " ").split()).replace("$", r"\$")
        if cls in style.TECHNIQUE_STYLE:
            keys.append(cls)
            shown.append(name or cls.replace("_", " "))
        else:
            keys.append(name or _NOT_GIVEN)
            shown.append(name or _NOT_GIVEN)
    return np.array(keys, dtype=object), np.array(shown, dtype=object)


def measurement_rows(doc):
    """Plottable residual rows (all but 'rejected') as a dict of arrays.

    Observed positions of flipped rows are given after the 180 deg correction, as fitted.

    Returns
    -------
    dict
        line, epoch (in the log's scale), epoch_yr, technique (group key: the class of a
        known technique, else the name as written), technique_name (as written), status;
        x_obs, y_obs, x_pred, y_pred [arcsec]; d_theta_deg, d_rho_arcsec,
        sigma_theta_deg, sigma_rho_arcsec.
    """
    rows = [r for r in doc.get("residuals", []) if r.get("status") != "rejected"]
    get = lambda key: np.array([_float(r.get(key)) for r in rows], float)  # noqa: E731
    status = np.array([r.get("status", "used") for r in rows], dtype=object)
    theta = np.radians(get("theta_deg") + np.where(status == "flipped", 180.0, 0.0))
    rho, theta_p = get("rho_arcsec"), np.radians(get("theta_pred_deg"))
    rho_p = get("rho_pred_arcsec")
    keys, names = _technique_names(rows)
    return {"line": np.array([r.get("line") for r in rows]),
            "epoch": _epochs(rows, epoch_scale_of(doc)), "epoch_yr": get("epoch_yr"),
            "technique": keys, "technique_name": names, "status": status,
            "x_obs": rho * np.cos(theta), "y_obs": rho * np.sin(theta),
            "x_pred": rho_p * np.cos(theta_p), "y_pred": rho_p * np.sin(theta_p),
            "d_theta_deg": get("d_theta_deg"), "d_rho_arcsec": get("d_rho_arcsec"),
            "sigma_theta_deg": get("sigma_theta_deg"), "sigma_rho_arcsec": get("sigma_rho_arcsec")}


def _ordered(techniques):
    """Known techniques in ``TECHNIQUE_STYLE`` order (oldest first), then the others by name."""
    names = set(techniques)
    return ([t for t in style.TECHNIQUE_STYLE if t in names]
            + sorted(names - set(style.TECHNIQUE_STYLE)))


def technique_labels(rows):
    """{technique: legend label}: the names the log wrote; an unknown one is starred."""
    labels = {}
    for key in _ordered(rows["technique"]):
        written = dict.fromkeys(rows["technique_name"][rows["technique"] == key])
        star = "" if key in style.TECHNIQUE_STYLE else "*"
        labels[key] = ", ".join(written) + star
    return labels


def _unknown_note(rows):
    """The key's note on the default sigma of unknown techniques ('' when there are none)."""
    if all(t in style.TECHNIQUE_STYLE for t in rows["technique"]):
        return ""
    sig_theta, sig_rho = TECHNIQUE_DEFAULTS["unknown"]
    return (rf"* not a technique orbweigh knows: missing errors were taken as "
            rf"$\sigma_\theta$ = {fmt.number(sig_theta)}" "\N{DEGREE SIGN}, "
            rf"$\sigma_\rho$ = {fmt.number(sig_rho)} arcsec")


def _marker_kwargs(tech_style, status):
    st = style.STATUS_STYLE.get(status, style.STATUS_STYLE["used"])
    face = tech_style["color"] if st["face"] == "fill" else "none"
    return {"marker": tech_style["marker"], "mfc": face, "mec": st.get("edge", tech_style["color"]),
            "mew": 0.9, "alpha": st["alpha"], "linestyle": "none"}


def _groups(rows):
    """(technique, status, mask) for each combination present."""
    for tech in _ordered(rows["technique"]):
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


def _flag_handles(rows):
    """Short key of the flags present: flipped, outlier, excluded."""
    from matplotlib.lines import Line2D
    handles = []
    for status in _FLAGS:
        if np.any(rows["status"] == status):
            st = style.STATUS_STYLE[status]
            kw = _marker_kwargs({"color": "#777777", "marker": "o"}, status)
            if st["ring"]:
                kw.update(ms=6.5, mec=st["ring"])
            handles.append(Line2D([], [], label=st["label"], **kw))
    return handles


def _technique_handles(rows, styles):
    from matplotlib.lines import Line2D
    labels = technique_labels(rows)
    return [Line2D([], [], label=labels[t], **_marker_kwargs(styles[t], "used"))
            for t in _ordered(styles)]


def _key_height_in(n_rows, note):
    """Height [in] of a key of ``n_rows`` legend rows and an optional note line."""
    return ((n_rows + (0.8 if note else 0.0)) * style.KEY_ROW_PT + 2.0) / 72.0


def _key_width_in(key_rows, note):
    """Width [in] of the widest key row (legend text at the style's size, markers, spacing)."""
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextPath
    size = style.KEY_FONT_PT
    prop = FontProperties(size=size)

    def text_pt(text):
        return TextPath((0, 0), text, prop=prop).get_extents().width

    widths = [sum(text_pt(h.get_label()) for h in handles)
              + len(handles) * (_KEY["handlelength"] + _KEY["handletextpad"]) * size
              + (len(handles) - 1) * _KEY["columnspacing"] * size for handles in key_rows]
    if note:
        widths.append(text_pt(note) * 6.0 / size)
    return (max(widths, default=0.0) + 24.0) / 72.0


def _fit_width(fig, key_rows, note):
    """Widen ``fig`` when its key would not fit in one row per kind of entry."""
    width, height = fig.get_size_inches()
    fig.set_size_inches(max(width, _key_width_in(key_rows, note)), height)


def _draw_key(host, key_rows, note=""):
    """Legends of one row each, stacked from the top of the key's own (empty) axes: e.g.
    the geometry, the techniques, the flags; an optional note line below them.

    Returns
    -------
    list of matplotlib Legend
        One per row, top row first.
    """
    from matplotlib.legend import Legend
    from matplotlib.transforms import ScaledTranslation, blended_transform_factory
    fig = host.get_figure(root=True)
    # Centred on the figure (not on the axes, which a y label pushes right).
    frame = blended_transform_factory(fig.transFigure, host.transAxes)

    def below_top(points):
        return frame + ScaledTranslation(0.0, -points / 72.0, fig.dpi_scale_trans)

    legends = []
    for k, handles in enumerate(key_rows):
        legend = Legend(host, handles, [h.get_label() for h in handles], loc="upper center",
                        bbox_to_anchor=(0.5, 1.0),
                        bbox_transform=below_top(1.0 + k * style.KEY_ROW_PT),
                        ncols=len(handles), fontsize=style.KEY_FONT_PT, borderaxespad=0.0,
                        borderpad=0.1, **_KEY)
        legend.set_in_layout(False)   # the key axes' height already makes the room
        host.add_artist(legend)
        legends.append(legend)
    if note:
        host.text(0.5, 1.0, note, transform=below_top(2.0 + len(key_rows) * style.KEY_ROW_PT),
                  ha="center", va="top", fontsize=6.0, gid="technique note", in_layout=False)
    host.set_axis_off()
    return legends


def _caller_legend(host, key_rows, note=""):
    """One two-column legend of every key entry, under ``host`` when it is an Axes, above
    the figure when it is a Figure: drawing into a caller's axes, the caller owns the page
    (and may extend ``legend_handles``)."""
    handles = [h for row in key_rows for h in row]
    kwargs = {"handles": handles, "ncols": 2, "fontsize": style.KEY_FONT_PT, **_KEY}
    if hasattr(host, "transAxes"):
        legend = host.legend(loc="upper center", bbox_to_anchor=(0.5, -0.13), **kwargs)
    else:
        legend = host.legend(loc="outside upper center", **kwargs)
    if note:
        legend.set_title(note, prop={"size": 6.0})
    return legend


def _with_key(width_in, plot_height_in, layout, n_key_rows, note, below=False):
    """(key axes, named axes) of a new figure with a key row above (or ``below``) ``layout``."""
    key_in = _key_height_in(n_key_rows, note)
    key = ["key"] * len(layout[0])
    rows, ratios = (([*layout, key], [plot_height_in / len(layout)] * len(layout) + [key_in])
                    if below else ([key, *layout], [key_in] + [plot_height_in / len(layout)]
                                   * len(layout)))
    _, named = style.new_mosaic(width_in, plot_height_in + key_in, rows, height_ratios=ratios)
    return named.pop("key"), named


def _visible_proxy(handle):
    """A legend stand-in for the faint band of orbits, which would be invisible at its size."""
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D
    if not isinstance(handle, LineCollection):
        return handle
    return Line2D([], [], color=style.BAND, lw=2.0, alpha=0.6, label=handle.get_label())


#: Corners of the sky plot for the compass (origin of its arrows, axes fraction), in the
#: order preferred when they hold equally few points.
_COMPASS_CORNERS = ((0.93, 0.07), (0.93, 0.80), (0.20, 0.07), (0.20, 0.80))


def _compass_corner(ax, east, north):
    """The corner (``_COMPASS_CORNERS``) whose 0.2 x 0.2 box holds the fewest points."""
    ok = np.isfinite(east) & np.isfinite(north)
    frac = ax.transAxes.inverted().transform(
        ax.transData.transform(np.column_stack([east[ok], north[ok]])))
    counts = [np.sum((np.abs(frac[:, 0] - (x - 0.05)) < 0.12)
                     & (np.abs(frac[:, 1] - (y + 0.05)) < 0.12)) for x, y in _COMPASS_CORNERS]
    return _COMPASS_CORNERS[int(np.argmin(counts))]


def _draw_compass(ax, origin):
    # N up and E left, arrows from ``origin`` (axes fraction).
    length = 0.10
    arrow = {"arrowstyle": "-|>", "color": style.INK, "lw": 0.8}
    ax.annotate("N", xy=origin, xytext=(origin[0], origin[1] + length), xycoords="axes fraction",
                textcoords="axes fraction", ha="center", va="bottom", fontsize=7,
                arrowprops=dict(arrow, arrowstyle="<|-"), gid="compass")
    ax.annotate("E", xy=origin, xytext=(origin[0] - length, origin[1]), xycoords="axes fraction",
                textcoords="axes fraction", ha="right", va="center", fontsize=7,
                arrowprops=dict(arrow, arrowstyle="<|-"))


def _sky_limits(ax, east, north):
    """Limits around the given points (and the primary), 8 % room; East increases to the left.

    The band of posterior orbits is left out on purpose: when the fit is poor its orbits
    wander far off and would shrink the data to a corner.
    """
    east = np.append(east[np.isfinite(east)], 0.0)
    north = np.append(north[np.isfinite(north)], 0.0)
    pad = 0.08 * max(np.ptp(east), np.ptp(north), 1e-12)
    ax.set_xlim(east.max() + pad, east.min() - pad)
    ax.set_ylim(north.min() - pad, north.max() + pad)
    ax.set_aspect("equal", adjustable="box")   # the limits stay; the frame takes the shape


def plot_orbit(doc, ax=None, n_band=80, seed=None):
    """The apparent orbit on the sky with every measurement and its O-C line.

    Parameters
    ----------
    doc : dict
        Result document.
    ax : matplotlib Axes, optional
        Where to draw; a new single-column figure (with its key below the orbit) when None.
    n_band : int
        Number of posterior orbits drawn as a translucent band (posterior draws file, else
        the covariance; no band when the document has neither). 0 draws none.
    seed : int, optional
        Seed for choosing the band's draws; default the document's seed.

    Returns
    -------
    matplotlib Axes
        Horizontal axis: y = rho sin theta (East, increasing to the LEFT); vertical axis:
        x = rho cos theta (North, up), both in the unit of ``orbit_unit(doc)``. The axes
        span the measured points and the fitted orbit, not the band.
    """
    from matplotlib.collections import LineCollection
    rows = measurement_rows(doc)
    styles = style.technique_styles(rows["technique"])
    note = _unknown_note(rows)
    with style.figure_style():
        key_ax = None
        if ax is None:
            n_rows = 1 + bool(len(styles)) + bool(_flag_handles(rows))
            key_ax, named = _with_key(style.SINGLE_COLUMN_IN, 3.9, [["sky"]], n_rows, note,
                                      below=True)
            ax = named["sky"]
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
                                             gid="posterior band"), autolim=False)
        reach = 1.08 * float(np.max(np.hypot(x, y)))
        node = np.radians(best.node_deg)
        ax.plot([-reach * np.sin(node), reach * np.sin(node)],
                [-reach * np.cos(node), reach * np.cos(node)], color=style.NODES, lw=0.7,
                ls=(0, (5, 3)), zorder=1, label="line of nodes", gid="line of nodes")
        ax.plot(y, x, color=style.ORBIT, lw=1.1, zorder=2, label="fitted orbit", gid="orbit")
        ax.plot([0, y[0]], [0, x[0]], color=style.PERIASTRON, lw=0.6, ls=":", zorder=2)
        ax.plot(y[0], x[0], marker="o", ms=5, mfc="white", mec=style.PERIASTRON, mew=1.2,
                linestyle="none", zorder=5, gid="periastron",
                label="node passage (T)" if t_is_node_passage(doc["elements"]) else "periastron")
        # Eccentric anomaly grows with time, so the arrow E = pi -> pi + 0.3 shows the motion.
        k = np.searchsorted(_E_GRID, np.pi)
        ax.annotate("", xy=(y[k + 17], x[k + 17]), xytext=(y[k], x[k]), zorder=5,
                    gid="direction of motion",
                    arrowprops={"arrowstyle": "-|>,head_length=0.6,head_width=0.3",
                                "color": style.ORBIT, "lw": 1.4})
        _draw_measurements(ax, rows, styles, scale)
        ax.plot(0, 0, marker="*", ms=9, color=style.INK, linestyle="none", zorder=6,
                label="primary", gid="primary")
        east = np.concatenate([rows["y_obs"] * scale, y])
        north = np.concatenate([rows["x_obs"] * scale, x])
        _sky_limits(ax, east, north)
        ax.apply_aspect()    # the frame's final shape, before points are counted in it
        _draw_compass(ax, _compass_corner(ax, east, north))
        ax.set_xlabel(f"East offset, $\\rho\\,\\sin\\theta$ [{unit}]")
        ax.set_ylabel(f"North offset, $\\rho\\,\\cos\\theta$ [{unit}]")
        geometry = [_visible_proxy(h) for h in ax.get_legend_handles_labels()[0]]
        key_rows = [r for r in (geometry, _technique_handles(rows, styles), _flag_handles(rows))
                    if r]
        if key_ax is not None:
            _fit_width(ax.figure, key_rows, note)
            _draw_key(key_ax, key_rows, note)
        else:   # the caller's axes: one legend, which the caller may extend
            _caller_legend(ax, key_rows, note)
    return ax


def _half_range(values, fitted, floor):
    """Half-height of a residual axis: the fitted points' largest |value|, 25 % room."""
    v = np.abs(values[fitted & np.isfinite(values)])
    return max(1.25 * float(v.max()) if v.size else 0.0, floor)


def _draw_residual_panel(ax, t, values, errors, rows, styles, limit, unit_text):
    """Residuals of every group; points beyond +-limit sit on the edge with their value."""
    for tech, status, mask in _groups(rows):
        kw = _marker_kwargs(styles[tech], status)
        inside = mask & (np.abs(values) <= 0.93 * limit)
        outside = mask & (np.abs(values) > 0.93 * limit)
        if inside.any():
            ax.errorbar(t[inside], values[inside],
                        yerr=None if errors is None else errors[inside],
                        ecolor=styles[tech]["color"], elinewidth=0.6, capsize=0, zorder=3,
                        gid=f"residuals {tech} {status}", **kw)
        if outside.any():
            edge = np.sign(values[outside]) * 0.93 * limit
            ax.plot(t[outside], edge, zorder=3, gid=f"clipped {tech} {status}", **kw)
            for tx, ty, v in zip(t[outside], edge, values[outside]):
                ax.annotate(f"{fmt.number(float(v), 3)}{unit_text}", xy=(tx, ty),
                            xytext=(4, 0), textcoords="offset points", ha="left",
                            va="center", fontsize=6, gid="clipped value")
        ring = style.STATUS_STYLE[status]["ring"]
        if ring:
            shown = np.clip(values[mask], -0.93 * limit, 0.93 * limit)
            ax.plot(t[mask], shown, marker="o", ms=8.0, mfc="none", mec=ring, mew=0.8,
                    linestyle="none", zorder=4)
    ax.set_ylim(-limit, limit)


def plot_residuals(doc, axes=None):
    """O-C in theta and rho against epoch, and the same in units of each point's sigma.

    The left column gives the residuals with their error bars, the right column
    (O-C)/sigma, so that techniques of very different precision can be compared. Each
    axis spans the fitted points (used and flipped) with room to spare; an outlier or
    excluded point beyond sits on the edge, its value written beside it.

    Parameters
    ----------
    doc : dict
        Result document.
    axes : sequence of two or four matplotlib Axes, optional
        (theta, rho[, theta / sigma, rho / sigma]) axes: given two, only the residuals in
        degrees and in the orbit's unit are drawn; a new double-column figure with all four
        and the key on top when None.

    Returns
    -------
    tuple of matplotlib Axes
        (theta [deg], rho [arcsec or mas, as ``orbit_unit``][, theta / sigma,
        rho / sigma]); horizontal axes in the log's epoch scale (``epoch_axis``).
    """
    unit, scale = orbit_unit(doc)
    rows = measurement_rows(doc)
    styles = style.technique_styles(rows["technique"])
    note = _unknown_note(rows)
    key_rows = [r for r in (_technique_handles(rows, styles), _flag_handles(rows)) if r]
    offset, epoch_text = epoch_axis(rows["epoch"], epoch_scale_of(doc))
    t = rows["epoch"] - offset
    fitted = np.isin(rows["status"], ("used", "flipped"))
    with style.figure_style():
        key_ax = None
        if axes is None:
            key_ax, named = _with_key(style.DOUBLE_COLUMN_IN, 3.6, [["t", "tn"], ["r", "rn"]],
                                      len(key_rows), note)
            axes = [named[k] for k in ("t", "r", "tn", "rn")]
            for ax in axes[1:]:
                ax.sharex(axes[0])
        axes = tuple(axes)
        panels = [
            (rows["d_theta_deg"], rows["sigma_theta_deg"], r"O$-$C in $\theta$ [deg]",
             "\N{DEGREE SIGN}"),
            (rows["d_rho_arcsec"] * scale, rows["sigma_rho_arcsec"] * scale,
             rf"O$-$C in $\rho$ [{unit}]", f" {unit}"),
            (rows["d_theta_deg"] / rows["sigma_theta_deg"], None,
             r"(O$-$C)/$\sigma$ in $\theta$", "\N{GREEK SMALL LETTER SIGMA}"),
            (rows["d_rho_arcsec"] / rows["sigma_rho_arcsec"], None,
             r"(O$-$C)/$\sigma$ in $\rho$", "\N{GREEK SMALL LETTER SIGMA}")][:len(axes)]
        for ax, (values, errors, label, unit_text) in zip(axes, panels):
            ax.axhline(0.0, color=style.NODES, lw=0.7, zorder=1)
            if errors is None:   # normalised: the +-1 and +-3 sigma marks
                ax.axhspan(-1.0, 1.0, color=style.BAND, alpha=0.15, lw=0, zorder=0)
                for level in (-3.0, 3.0):
                    ax.axhline(level, color=style.NODES, lw=0.6, ls=":", zorder=1)
                floor = 3.5
            else:                # at least the typical error bar of a fitted point
                floor = float(np.nanmedian(errors[fitted])) if fitted.any() else 1.0
            limit = _half_range(values, fitted, floor)
            _draw_residual_panel(ax, t, values, errors, rows, styles, limit, unit_text)
            ax.set_ylabel(label)
        for ax in axes[1::2]:
            ax.set_xlabel(epoch_text)
        for ax in axes[0::2]:
            ax.tick_params(labelbottom=False)
        if len(axes) == 4:
            axes[0].set_title("Residuals", fontsize=8)
            axes[2].set_title("Residuals in units of each point's $\\sigma$", fontsize=8)
        if key_ax is not None:
            _fit_width(key_ax.figure, key_rows, note)
            _draw_key(key_ax, key_rows, note)
        else:   # the caller's axes: one figure legend above them
            _caller_legend(axes[0].get_figure(root=False), key_rows, note)
    return axes


# ---------------------------------------------------------------------------- corner plots
def _round_epoch(values):
    """(epoch, its text): a round epoch near the draws, so T ticks show short offsets.

    The step is the power of ten at least ten times the draws' spread (16-84 %), so the
    offsets keep a few significant digits; the epoch is the median rounded to that step.
    """
    lo, med, hi = np.percentile(values, [16, 50, 84])
    power = int(np.ceil(np.log10(max(10.0 * (hi - lo), 1e-9))))
    zero = float(np.round(med / 10.0**power) * 10.0**power)
    return zero, fmt.fixed(zero, max(0, -power))


def _titles(data, symbols, units):
    """Two-line 'symbol [unit]' / 'median (+up, -down)' of each column (16-50-84 %).

    The numbers are written by ``formatting.interval``, as everywhere else.
    """
    titles = []
    for column, symbol, unit in zip(np.asarray(data).T, symbols, units):
        lo, med, hi = np.percentile(column, [16, 50, 84])
        head = f"{symbol} [{unit}]" if unit else symbol
        titles.append(f"{head}\n{fmt.interval(med, lo, hi, latex=True)}")
    return titles


def _inner_ticks(axis, limits, room=0.12):
    """At most three round ticks, none within ``room`` of either end of the panel.

    Side by side, corner panels put one panel's last tick next to the neighbour's first;
    keeping ticks off the ends keeps their labels apart.
    """
    from matplotlib.ticker import FixedLocator, MaxNLocator
    lo, hi = sorted(limits)
    edge = room * (hi - lo)
    ticks = [t for t in MaxNLocator(3).tick_values(lo, hi) if lo + edge <= t <= hi - edge]
    axis.set_major_locator(FixedLocator(ticks))


def _kept(seq, keep):
    return None if seq is None else [x for x, k in zip(seq, keep) if k]


def _corner(data, labels, titles, truths, fig):
    """A corner plot of the columns that vary: a held element's draws are all one value
    (no panel to draw; the element tables state it as held)."""
    import corner
    varies = np.ptp(data, axis=0) > 0
    data = data[:, varies]
    labels, titles, truths = (_kept(seq, varies) for seq in (labels, titles, truths))
    n = data.shape[1]
    with style.figure_style():
        if fig is None:
            from matplotlib.figure import Figure
            fig = Figure(figsize=(style.DOUBLE_COLUMN_IN, style.DOUBLE_COLUMN_IN))
        corner.corner(data, labels=labels, truths=truths, fig=fig, color=style.ORBIT,
                      truth_color=style.PERIASTRON, quantiles=(0.16, 0.5, 0.84),
                      plot_datapoints=False, fill_contours=True, levels=(0.393, 0.865),
                      smooth=1.0, bins=30, max_n_ticks=3, labelpad=0.16,
                      label_kwargs={"fontsize": 8}, hist_kwargs={"color": style.ORBIT})
        # corner sizes its margins for its own (larger) default figure; ours is narrower.
        fig.subplots_adjust(left=0.12, bottom=0.12, right=0.98, top=0.95)
        grid = np.array(fig.axes).reshape(n, n)
        for k, title in enumerate(titles):
            grid[k, k].set_title(title, fontsize=6.5, pad=3, linespacing=1.3)
        for ax in fig.axes:
            if not ax.get_frame_on():     # the empty upper triangle
                continue
            ax.tick_params(labelsize=6.0)
            _inner_ticks(ax.xaxis, ax.get_xlim())
            if ax not in np.diag(grid):
                _inner_ticks(ax.yaxis, ax.get_ylim())
            for tick in ax.get_xticklabels():
                tick.set(rotation=45, ha="right", rotation_mode="anchor")
            for tick in ax.get_yticklabels():
                tick.set(rotation=45, ha="right", rotation_mode="anchor")
    return fig


def plot_corner_elements(doc, draws, fig=None):
    """Corner plot of the seven elements' posterior draws, best fit marked.

    T is in the log's epoch scale, plotted as its offset from a round epoch named in the
    axis label; each diagonal panel is titled with the median and its 16-84 % interval.

    Parameters
    ----------
    doc : dict
        Result document (for the best-fit elements and the epoch scale).
    draws : ndarray, shape (n, 7)
        Posterior draws, internal units (see ``posterior.posterior_draws``).
    fig : matplotlib Figure, optional
        Empty figure to draw into; a new double-column figure when None.

    Returns
    -------
    matplotlib Figure
    """
    scale = epoch_scale_of(doc)
    data = np.array(draws, float)
    best = np.array(elements_from_document(doc).as_tuple())
    data[:, 1] = from_julian_year(data[:, 1], scale)
    best[1] = float(from_julian_year(best[1], scale))
    t_unit = fmt.epoch_label(scale)
    titles = _titles(data, ("$P$", "$T$", "$e$", "$a$", "$i$", r"$\Omega$", r"$\omega$"),
                     ("yr", t_unit, "", "arcsec", "deg", "deg", "deg"))
    zero, zero_text = _round_epoch(data[:, 1])
    data[:, 1] -= zero
    best[1] -= zero
    labels = [r"$P$ [yr]", f"$T$ \N{MINUS SIGN} {zero_text}\n[{t_unit}]", r"$e$",
              r"$a$ [arcsec]", r"$i$ [deg]", r"$\Omega$ [deg]", r"$\omega$ [deg]"]
    return _corner(data, labels, titles, list(best), fig)


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
    titles = _titles(data, (r"$\mathcal{M}$", r"$\varpi$", "$a$", "$P$"),
                     (r"M$_\odot$", "mas", "arcsec", "yr"))
    return _corner(data, labels, titles, None, fig)


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


# ------------------------------------------------------------------------ radial velocities
def velocity_rows(doc):
    """Plottable radial-velocity rows (all but 'rejected') of a combined solution.

    Returns
    -------
    dict
        line, epoch (in the velocity log's scale), epoch_yr, component (1 or 2), rv, sigma,
        model, residual [km/s], status; "scale": the velocity log's epoch scale.
    """
    rows = [r for r in doc.get("rv_residuals") or [] if r.get("status") != "rejected"]
    get = lambda key: np.array([_float(r.get(key)) for r in rows], float)  # noqa: E731
    scale = (doc.get("velocities") or {}).get("epoch_scale") or epoch_scale_of(doc)
    return {"line": np.array([r.get("line") for r in rows]), "epoch": _epochs(rows, scale),
            "epoch_yr": get("epoch_yr"), "component": np.array([int(r.get("component", 1))
                                                               for r in rows], int),
            "rv": get("rv"), "sigma": get("sigma"), "model": get("model"),
            "residual": get("residual"),
            "status": np.array([r.get("status", "used") for r in rows], dtype=object),
            "scale": scale}


def velocity_model(doc, t_yr):
    """Model velocities (V1, V2) [km/s] of the document's combined solution at Julian years.

    The orbit's P, T, e, omega with the document's gamma, K1 and K2 (0 when absent), through
    ``spectroscopic.radial_velocities``, the function the fit itself uses.
    """
    from ..spectroscopic import radial_velocities
    el = elements_from_document(doc)
    amp = {k: float((doc.get(k) or {}).get("value") or 0.0) for k in ("gamma", "K1", "K2")}
    return radial_velocities(np.asarray(t_yr, float), el.period_yr, el.periastron_yr, el.e,
                             el.omega_deg, amp["K1"], amp["K2"], amp["gamma"])


def _velocity_key(rows, doc):
    from matplotlib.lines import Line2D
    handles = [Line2D([], [], color=st["color"], marker=st["marker"], mfc=st["color"],
                      mec=st["color"], lw=1.0, label=st["label"])
               for c, st in style.COMPONENT_STYLE.items() if np.any(rows["component"] == c)]
    handles.append(Line2D([], [], color=style.NODES, lw=0.8, ls="--",
                          label=r"systemic velocity $\gamma$"))
    if np.any(rows["status"] == "excluded"):
        kw = _marker_kwargs({"color": "#777777", "marker": "o"}, "excluded")
        handles.append(Line2D([], [], label=style.STATUS_STYLE["excluded"]["label"], **kw))
    return [handles]


def _time_grid(t_yr, period_yr):
    """Julian years spanning the velocities (3 % room), ~400 points per period."""
    lo, hi = float(np.nanmin(t_yr)), float(np.nanmax(t_yr))
    pad = 0.03 * (hi - lo) if hi > lo else 0.05 * period_yr
    n = int(np.clip((hi - lo + 2 * pad) / period_yr * 400, 400, 20000))
    return np.linspace(lo - pad, hi + pad, n)


def _phase_label(e):
    """A circular orbit has no periastron: its T is where the argument of latitude is
    omega, the node passage with the convention omega = 0."""
    return ("Orbital phase (0 at periastron)" if e > 0.0 else
            "Orbital phase (0 at T: the node passage for \u03c9 = 0; circular orbit)")


def plot_radial_velocities(doc, axes=None):
    """Velocities of each component against orbital phase and against time, with the model.

    Top: measured velocities (error bars: sigma as used) and the model curves of the
    combined solution; bottom: O-C. Left against the orbital phase (0 at periastron T, or
    for a circular orbit at T, the node passage for omega = 0),
    right against the epoch in the velocity log's own scale. Excluded rows are hollow.

    Parameters
    ----------
    doc : dict
        Result document of a combined fit (with "rv_residuals", "gamma", "K1"/"K2").
    axes : dict of matplotlib Axes, optional
        {"phase", "time", "phase_oc", "time_oc"}; a new double-column figure with its key
        on top when None.

    Returns
    -------
    dict of matplotlib Axes
        The four axes by name.
    """
    rows = velocity_rows(doc)
    el = elements_from_document(doc)
    key_rows = _velocity_key(rows, doc)
    phase = np.mod((rows["epoch_yr"] - el.periastron_yr) / el.period_yr, 1.0)
    offset, epoch_text = epoch_axis(rows["epoch"], rows["scale"])
    grid_phase = np.linspace(0.0, 1.0, 401)
    curve_phase = velocity_model(doc, el.periastron_yr + grid_phase * el.period_yr)
    grid_t = _time_grid(rows["epoch_yr"], el.period_yr)
    curve_t = velocity_model(doc, grid_t)
    x_grid = from_julian_year(grid_t, rows["scale"]) - offset
    gamma = float((doc.get("gamma") or {}).get("value") or 0.0)
    with style.figure_style():
        key_ax = None
        if axes is None:
            key_ax, axes = _with_key(style.DOUBLE_COLUMN_IN, 3.8,
                                     [["phase", "time"], ["phase_oc", "time_oc"]],
                                     len(key_rows), "")
            gs = axes["phase"].get_subplotspec().get_gridspec()
            gs.set_height_ratios([gs.get_height_ratios()[0], 2.6, 1.2])
            axes["phase_oc"].sharex(axes["phase"])
            axes["time_oc"].sharex(axes["time"])
            axes["time"].sharey(axes["phase"])
            axes["time_oc"].sharey(axes["phase_oc"])
        for name, x_rows, x_model, curves in (
                ("phase", phase, grid_phase, curve_phase),
                ("time", rows["epoch"] - offset, x_grid, curve_t)):
            top, bottom = axes[name], axes[f"{name}_oc"]
            top.axhline(gamma, color=style.NODES, lw=0.8, ls="--", zorder=1, gid="gamma")
            bottom.axhline(0.0, color=style.NODES, lw=0.7, zorder=1)
            for comp, st in style.COMPONENT_STYLE.items():
                here = rows["component"] == comp
                if not here.any():
                    continue
                top.plot(x_model, curves[comp - 1], color=st["color"], lw=1.0, zorder=2,
                         gid=f"model {comp} {name}")
                for status in ("used", "excluded"):
                    m = here & (rows["status"] == status)
                    if not m.any():
                        continue
                    kw = _marker_kwargs(st, status)
                    kw.update(ecolor=st["color"], elinewidth=0.6, capsize=0, zorder=3)
                    top.errorbar(x_rows[m], rows["rv"][m], yerr=rows["sigma"][m],
                                 gid=f"velocities {comp} {status} {name}", **kw)
                    bottom.errorbar(x_rows[m], rows["residual"][m], yerr=rows["sigma"][m],
                                    gid=f"residuals {comp} {status} {name}", **kw)
            top.tick_params(labelbottom=False)
            bottom.set_ylabel(r"O$-$C [km s$^{-1}$]")
            top.set_ylabel(r"Radial velocity [km s$^{-1}$]")
        axes["phase"].set_xlim(0.0, 1.0)
        axes["phase_oc"].set_xlabel(_phase_label(el.e))
        axes["time_oc"].set_xlabel(epoch_text)
        if key_ax is not None:
            _fit_width(key_ax.figure, key_rows, "")
            _draw_key(key_ax, key_rows)
        else:
            _caller_legend(axes["phase"].get_figure(root=False), key_rows)
    return axes
