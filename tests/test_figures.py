"""The report's figures as a reader sees them: names, keys, residual views, limits, epochs."""
from __future__ import annotations

import copy

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg

from orbweigh import formatting as fmt
from orbweigh.measurements import TECHNIQUE_DEFAULTS
from orbweigh.reductions import from_julian_year
from orbweigh.report import figures, style

from report_fixtures import build_document


@pytest.fixture(scope="module")
def built():
    return build_document(n_draws=1500)


def _julian(doc):
    """The same document as if the log had written Julian years."""
    doc = copy.deepcopy(doc)
    t = doc["elements"]["T"]
    t.update(value=float(from_julian_year(_t_julian(doc), "julian")), scale="julian")
    for r in doc["residuals"]:
        if "epoch_yr" in r:
            r["epoch"] = r["epoch_yr"]
    return doc


def _t_julian(doc):
    from orbweigh.result import elements_from_document
    return elements_from_document(doc).periastron_yr


def _rendered(fig):
    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    return canvas.get_renderer()


def _legends(fig):
    from matplotlib.legend import Legend
    found = [a for ax in fig.axes for a in ax.get_children() if isinstance(a, Legend)]
    return list({id(a): a for a in [*found, *fig.legends]}.values())


def _labels(legend):
    return [t.get_text() for t in legend.get_texts()]


def _unknown_doc(doc):
    """Two rows of a technique orbweigh does not know, written by the user."""
    doc = copy.deepcopy(doc)
    for r in doc["residuals"][2:4]:
        r.update(technique="unknown", technique_text="lunar occultation")
    return doc


# ---------------------------------------------------------------- names, key and its rows
def test_names_as_written_and_one_row_of_techniques(built):
    doc, _ = built
    ax_t = figures.plot_residuals(doc)[0]
    fig = ax_t.get_figure(root=True)
    renderer = _rendered(fig)
    legends = _legends(fig)
    techniques = next(lg for lg in legends if "micrometer" in _labels(lg))
    # As the fixture's log wrote them: 'Speckle' capitalised, 'adaptive_optics' read with a
    # space as the log reader reads '_'; in the fixed order of TECHNIQUE_STYLE.
    assert _labels(techniques) == ["micrometer", "Speckle", "adaptive optics"]
    heights = {round(t.get_window_extent(renderer).y0, 1) for t in techniques.get_texts()}
    assert len(heights) == 1                                   # one row
    flags = next(lg for lg in legends if "outlier" in _labels(lg))
    assert len({round(t.get_window_extent(renderer).y0, 1) for t in flags.get_texts()}) == 1
    # The key fits in the figure: no row cut at the edges.
    width = fig.bbox.width
    for lg in legends:
        box = lg.get_window_extent(renderer)
        assert box.x0 >= 0 and box.x1 <= width


def test_every_technique_keeps_its_fixed_look(built):
    doc, _ = built
    ax = figures.plot_orbit(doc, n_band=0)
    for gid, tech in (("measurements speckle used", "speckle"),
                      ("measurements micrometer used", "micrometer")):
        line = next(a for a in ax.get_children() if a.get_gid() == gid)
        assert line.get_marker() == style.TECHNIQUE_STYLE[tech]["marker"]
        assert line.get_markerfacecolor() == style.TECHNIQUE_STYLE[tech]["color"]


def test_unknown_technique_keeps_its_name_and_is_told_its_default_sigma(built):
    doc = _unknown_doc(built[0])
    ax = figures.plot_orbit(doc, n_band=0)
    fig = ax.get_figure(root=True)
    labels = [t for lg in _legends(fig) for t in _labels(lg)]
    assert "lunar occultation*" in labels and "unknown" not in labels
    note = next(t for a in fig.axes for t in a.texts if t.get_gid() == "technique note")
    sig_theta, sig_rho = TECHNIQUE_DEFAULTS["unknown"]
    assert f"{fmt.number(sig_theta)}\N{DEGREE SIGN}" in note.get_text()
    assert f"{fmt.number(sig_rho)} arcsec" in note.get_text()
    look = style.technique_styles(["lunar occultation"])["lunar occultation"]
    drawn = next(a for a in ax.get_children()
                 if a.get_gid() == "measurements lunar occultation used")
    assert drawn.get_marker() == look["marker"]


# ---------------------------------------------------------------------------- residuals
def test_normalised_residuals_are_oc_over_sigma_and_outliers_sit_on_the_edge(built):
    doc, _ = built
    ax_t, ax_r, ax_tn, ax_rn = figures.plot_residuals(doc)
    rows = [r for r in doc["residuals"] if r.get("status") in ("used", "flipped")]
    z = np.array([r["d_theta_deg"] / r["sigma_theta_deg"] for r in rows])
    drawn = np.concatenate([np.asarray(a.get_ydata()) for a in ax_tn.get_lines()
                            if (a.get_gid() or "").startswith("residuals ")
                            and not a.get_gid().endswith(("outlier", "excluded"))])
    assert np.sort(drawn) == pytest.approx(np.sort(z))
    for ax in (ax_t, ax_r, ax_tn, ax_rn):
        lo, hi = ax.get_ylim()
        assert lo <= -np.abs(z).max() or ax is not ax_tn
    # The fixture's outlier is 6 deg off with sigma 1 deg: beyond the used points' range,
    # drawn on the edge with its value written beside it.
    outlier = next(r for r in doc["residuals"] if r.get("status") == "outlier")
    texts = [t.get_text() for t in ax_tn.texts if t.get_gid() == "clipped value"]
    value = outlier["d_theta_deg"] / outlier["sigma_theta_deg"]
    assert f"{fmt.number(value, 3)}\N{GREEK SMALL LETTER SIGMA}" in texts
    assert abs(value) > ax_tn.get_ylim()[1]


def test_residual_axes_hold_every_fitted_point(built):
    doc, _ = built
    ax_t, ax_r, _, _ = figures.plot_residuals(doc)
    unit, scale = figures.orbit_unit(doc)
    rows = [r for r in doc["residuals"] if r.get("status") in ("used", "flipped")]
    for ax, key, factor in ((ax_t, "d_theta_deg", 1.0), (ax_r, "d_rho_arcsec", scale)):
        values = np.array([r[key] for r in rows]) * factor
        lo, hi = ax.get_ylim()
        assert lo < values.min() and values.max() < hi


@pytest.mark.parametrize("scale, name", (("besselian", "Besselian year"),
                                         ("julian", "Julian year")))
def test_epoch_axes_are_in_the_logs_scale(built, scale, name):
    doc = built[0] if scale == "besselian" else _julian(built[0])
    axes = figures.plot_residuals(doc)
    assert axes[1].get_xlabel() == f"Epoch [{name}]"
    other = {"Besselian year", "Julian year"} - {name}
    fig = axes[0].get_figure(root=True)
    every_text = [ax.get_xlabel() + ax.get_ylabel() for ax in fig.axes]
    assert not any(o in t for t in every_text for o in other)
    # The points sit at the log's own epochs (Besselian and Julian differ by ~0.001 yr here).
    rows = [r for r in doc["residuals"] if r.get("status") == "used"
            and r["technique"] == "speckle"]
    line = next(a for a in axes[0].get_lines() if a.get_gid() == "residuals speckle used")
    assert np.asarray(line.get_xdata()) == pytest.approx([r["epoch"] for r in rows], abs=1e-9)


def test_epoch_axis_of_day_counts_names_its_offset():
    offset, label = figures.epoch_axis([2450761.3, 2460100.0], "jd")
    assert offset == 2450000.0 and label == "Epoch [JD \N{MINUS SIGN} 2450000]"
    assert figures.epoch_axis([1900.5], "besselian") == (0.0, "Epoch [Besselian year]")


# ---------------------------------------------------------------------------- sky plot
def test_sky_axes_follow_the_data_not_a_wild_band(built):
    doc = copy.deepcopy(built[0])
    cov = np.array(doc["covariance"]["matrix"])
    doc["covariance"]["matrix"] = (cov * 400.0).tolist()   # a poor fit: 20x the errors
    ax = figures.plot_orbit(doc, n_band=40)
    band = next(a for a in ax.get_children() if a.get_gid() == "posterior band")
    rows = figures.measurement_rows(doc)
    orbit = next(a for a in ax.get_children() if a.get_gid() == "orbit").get_xydata()
    east = np.concatenate([rows["y_obs"], orbit[:, 0], [0.0]])
    north = np.concatenate([rows["x_obs"], orbit[:, 1], [0.0]])
    (x_hi, x_lo), (y_lo, y_hi) = ax.get_xlim(), ax.get_ylim()   # East is to the left
    assert x_lo < east.min() and east.max() < x_hi
    assert y_lo < north.min() and north.max() < y_hi
    span = max(np.ptp(east), np.ptp(north))
    assert max(x_hi - x_lo, y_hi - y_lo) < 1.3 * span
    segments = np.concatenate(band.get_segments())
    assert np.ptp(segments[:, 0]) > 1.3 * span or np.ptp(segments[:, 1]) > 1.3 * span


# ---------------------------------------------------------------------------- corner
def _crowded(labels, renderer, along):
    """Whether two neighbouring 45-degree tick labels come closer than 1.4 font heights.

    Rotated labels are parallel strips; they stay apart when their anchors (the label's
    right end, ``rotation_mode='anchor'``) are at least a strip's width apart along the axis.
    """
    k = 0 if along == "x" else 1
    anchors = sorted(label.get_transform().transform(label.get_position())[k] for label in labels)
    size_px = labels[0].get_fontsize() * renderer.points_to_pixels(1.0)
    return bool(np.any(np.diff(anchors) < 1.4 * size_px))


def _overlaps(boxes):
    return any(a.overlaps(b) for k, a in enumerate(boxes) for b in boxes[k + 1:])


def test_corner_plot_t_offset_titles_and_no_colliding_ticks(built):
    doc, draws = built
    fig = figures.plot_corner_elements(doc, draws)
    renderer = _rendered(fig)
    grid = np.array(fig.axes).reshape(7, 7)
    t_scale = from_julian_year(draws[:, 1], "besselian")
    lo, med, hi = np.percentile(t_scale, [16, 50, 84])
    assert grid[1, 1].get_title() == (f"$T$ [Besselian year]\n"
                                      f"{fmt.interval(med, lo, hi, latex=True)}")
    # Spread (16-84 %) ~0.3 yr: ten times that is 3 yr, so the round epoch is a decade.
    assert 0.1 < hi - lo < 1.0
    zero = float(np.round(med / 10.0) * 10.0)
    assert grid[6, 1].get_xlabel() == f"$T$ \N{MINUS SIGN} {zero:.0f}\n[Besselian year]"
    ticks = [float(t.get_text().replace("\N{MINUS SIGN}", "-"))
             for t in grid[6, 1].get_xticklabels() if t.get_text()]
    assert ticks and all(abs(v) < 10.0 for v in ticks)     # offsets, not 2008.xx
    # No two tick labels of the bottom row or the left column touch.
    bottom = [t for ax in grid[6] for t in ax.get_xticklabels() if t.get_text()]
    left = [t for ax in grid[1:, 0] for t in ax.get_yticklabels() if t.get_text()]
    assert len(bottom) >= 7 and len(left) >= 6
    assert not _crowded(bottom, renderer, "x") and not _crowded(left, renderer, "y")
    # Titles of the diagonal stay apart too.
    titles = [grid[k, k].title.get_window_extent(renderer) for k in range(7)]
    assert not _overlaps(titles)


def test_corner_plot_leaves_out_held_elements(built):
    # e and omega held at 0 (a circular orbit, --fix e=0): their draws are one value,
    # which has no panel (corner itself refuses a column without spread); the five
    # others are drawn, each titled as before.
    doc, draws = built
    held = np.array(draws, float)
    held[:, 2] = 0.0
    held[:, 6] = 0.0
    fig = figures.plot_corner_elements(doc, held)
    grid = np.array(fig.axes).reshape(5, 5)
    assert [grid[k, k].get_title().split("\n")[0] for k in range(5)] == [
        "$P$ [yr]", "$T$ [Besselian year]", "$a$ [arcsec]", "$i$ [deg]", r"$\Omega$ [deg]"]


# ---------------------------------------------------------------------- radial velocities
def _rv_doc(doc, seed=7):
    """The fixture's orbit with velocities of both components from the independent 3-D
    generator (tests/synthetic.py: z from rotation matrices, V from dz/dt), epochs in JD.

    K1 and K2 are read off the generator's own curves (half their full range over one
    period), not from a velocity formula.
    """
    from orbweigh.result import elements_from_document
    from synthetic import radial_velocities_3d
    doc = copy.deepcopy(doc)
    el = elements_from_document(doc).to_keys()
    plx, q, gamma = 45.0, 0.82, -14.0
    one_turn = el["T"] + np.linspace(0.0, el["P"], 20001)
    v1, v2 = radial_velocities_3d(el, one_turn, plx, q, gamma)
    doc.update(gamma={"value": gamma, "error": 0.1, "unit": "km/s"},
               K1={"value": float(np.ptp(v1) / 2), "error": 0.1, "unit": "km/s"},
               K2={"value": float(np.ptp(v2) / 2), "error": 0.1, "unit": "km/s"},
               velocities={"epoch_scale": "jd", "n_used": 24}, combined={})
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(1998.0, 2024.0, 12))
    m1, m2 = radial_velocities_3d(el, t, plx, q, gamma)
    rows, line = [], 2
    for k, tk in enumerate(t):
        for comp, model in ((1, m1[k]), (2, m2[k])):
            rv = float(model + rng.normal(0.0, 0.4))
            rows.append({"line": line, "epoch": float(from_julian_year(tk, "jd")),
                         "epoch_yr": float(tk), "component": comp, "rv": rv, "sigma": 0.4,
                         "model": float(model), "residual": rv - float(model),
                         "status": "excluded" if line == 5 else "used"})
            line += 1
    rows.append({"line": line, "status": "rejected", "reason": "column 'rv' is empty"})
    doc["rv_residuals"] = rows
    return doc, el, (plx, q, gamma)


def test_velocity_model_drawn_equals_an_independent_kepler_orbit(built):
    from synthetic import radial_velocities_3d
    doc, el, (plx, q, gamma) = _rv_doc(built[0])
    axes = figures.plot_radial_velocities(doc)
    for comp in (1, 2):
        line = next(a for a in axes["phase"].get_lines() if a.get_gid() == f"model {comp} phase")
        phase, v = np.asarray(line.get_xdata()), np.asarray(line.get_ydata())
        pick = np.arange(0, phase.size, 37)
        expected = radial_velocities_3d(el, el["T"] + phase[pick] * el["P"], plx, q, gamma)
        # Tolerance: the generator's central difference and its read-off amplitudes.
        assert v[pick] == pytest.approx(expected[comp - 1], abs=2e-3)
        timed = next(a for a in axes["time"].get_lines() if a.get_gid() == f"model {comp} time")
        x = np.asarray(timed.get_xdata())[::97] + 2450000.0
        t_yr = 2000.0 + (x - 2451545.0) / 365.25          # JD to Julian year (J2000 = JD 2451545)
        expected = radial_velocities_3d(el, t_yr, plx, q, gamma)[comp - 1]
        assert np.asarray(timed.get_ydata())[::97] == pytest.approx(expected, abs=2e-3)


def test_velocity_figure_points_axes_and_labels(built):
    doc, el, _ = _rv_doc(built[0])
    axes = figures.plot_radial_velocities(doc)
    rows = [r for r in doc["rv_residuals"] if r.get("status") == "used" and r["component"] == 1]
    points = next(a for a in axes["time"].get_lines() if a.get_gid() == "velocities 1 used time")
    assert np.asarray(points.get_xdata()) + 2450000.0 == pytest.approx([r["epoch"] for r in rows])
    phased = next(a for a in axes["phase"].get_lines()
                  if a.get_gid() == "velocities 1 used phase")
    phase = np.mod((np.array([r["epoch_yr"] for r in rows]) - el["T"]) / el["P"], 1.0)
    assert np.asarray(phased.get_xdata()) == pytest.approx(phase)
    measured = [r for r in doc["rv_residuals"] if r.get("status") != "rejected"]
    for name, key in (("phase", "rv"), ("time", "rv"), ("phase_oc", "residual")):
        lo, hi = axes[name].get_ylim()
        values = [r[key] for r in measured]
        assert lo < min(values) and max(values) < hi
    assert axes["time_oc"].get_xlabel() == "Epoch [JD \N{MINUS SIGN} 2450000]"
    assert axes["phase_oc"].get_xlabel() == "Orbital phase (0 at periastron)"
    for name in ("phase", "time"):
        assert "km s$^{-1}$" in axes[name].get_ylabel()
        assert "km s$^{-1}$" in axes[f"{name}_oc"].get_ylabel()
    fig = axes["phase"].get_figure(root=True)
    key = _legends(fig)
    assert len(key) == 1 and _labels(key[0])[:2] == [style.COMPONENT_STYLE[1]["label"],
                                                        style.COMPONENT_STYLE[2]["label"]]
    hollow = next(a for a in axes["phase"].get_lines() if (a.get_gid() or "").startswith(
        "velocities") and "excluded" in a.get_gid())
    assert hollow.get_markerfacecolor() == "none"


def test_velocity_phase_of_a_circular_orbit_is_not_counted_from_periastron(built):
    # e = 0: no periastron; T is where the argument of latitude is omega (the node passage
    # with the convention omega = 0), and the phase axis says so.
    doc, _, _ = _rv_doc(built[0])
    doc["elements"]["e"] = {**doc["elements"]["e"], "value": 0.0}
    label = figures.plot_radial_velocities(doc)["phase_oc"].get_xlabel()
    assert "periastron" not in label and "node passage" in label and "circular" in label


def test_report_of_a_combined_solution_has_the_velocity_figure(built, tmp_path):
    from orbweigh.report.writer import write_report
    doc, _, _ = _rv_doc(built[0])
    written = write_report(doc, tmp_path / "report", formats=("png",))
    assert "radial_velocity.png" in written
    page = written["report.html"].read_text()
    assert "id='fig-radial_velocity'" in page
    assert page.index("id='combined'") < page.index("id='fig-radial_velocity'")


def test_compass_sits_where_no_measurement_is(built):
    doc = _unknown_doc(built[0])
    ax = figures.plot_orbit(doc, n_band=0)
    compass = next(t for t in ax.texts if t.get_gid() == "compass")
    x0, y0 = compass.xy                             # the arrows' origin, axes fraction
    rows = figures.measurement_rows(doc)
    frac = ax.transAxes.inverted().transform(
        ax.transData.transform(np.column_stack([rows["y_obs"], rows["x_obs"]])))
    inside = (frac[:, 0] > x0 - 0.12) & (frac[:, 0] < x0 + 0.02) & (frac[:, 1] > y0 - 0.02) \
        & (frac[:, 1] < y0 + 0.12)
    assert not inside.any()


def test_corner_t_of_a_julian_log_says_julian(built):
    doc, draws = built
    fig = figures.plot_corner_elements(_julian(doc), draws[:400])
    grid = np.array(fig.axes).reshape(7, 7)
    assert grid[6, 1].get_xlabel().endswith("[Julian year]")
    assert grid[1, 1].get_title().startswith("$T$ [Julian year]")
    assert not any("Besselian" in ax.get_xlabel() + ax.get_ylabel() + ax.get_title()
                   for ax in fig.axes)
