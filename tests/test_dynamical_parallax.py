"""The dynamical parallax against an independent computation: its fixed point found by
brentq on the defining equation (relations written here from the published coefficients),
and its Monte Carlo interval against first-order propagation through that fixed point."""
import json
import math
from pathlib import Path

import numpy as np
import pytest
from astropy import constants
from astropy import units as u
from scipy.optimize import brentq

from orbweigh.cli.main import main
from orbweigh.errors import InputError
from orbweigh.masses import RELATION_SCATTER, dynamical_parallax, mass_blocks

#: Third-law factor 4 pi^2 au^3 / (G M_sun yr^2), Julian year, IAU constants via astropy.
F = float((4 * math.pi**2 * constants.au**3 / (constants.GM_sun * (365.25 * u.day) ** 2))
          .decompose())
#: Eker et al. 2018, MNRAS 479, 5491, Table 4: (M_lo, M_hi, alpha, beta) of
#: log L = alpha log M + beta.
EKER = [(0.179, 0.45, 2.028, -0.976), (0.45, 0.72, 4.572, -0.102), (0.72, 1.05, 5.743, -0.007),
        (1.05, 2.4, 4.329, 0.010), (2.4, 7.0, 3.967, 0.093), (7.0, 31.0, 2.865, 1.105)]
#: Mann et al. 2019, ApJ 871, 63, Table 6: log M = sum a_i (M_Ks - 7.5)^i.
MANN = [-0.642, -0.208, -8.43e-4, 7.87e-3, 1.42e-4, -2.13e-4]
M_BOL_SUN = 4.74   # IAU 2015 Resolution B2


def _eker_log_l(mass):
    for lo, hi, alpha, beta in EKER:
        if lo < mass <= hi:
            return alpha * math.log10(mass) + beta
    raise ValueError("outside Table 4")


def _mass(abs_mag, band, offset):
    """Mass from an absolute magnitude: Table 4 inverted by brentq, or Table 6 summed."""
    if band == "K":
        return 10 ** (sum(c * (abs_mag - 7.5) ** k for k, c in enumerate(MANN)) + offset)
    log_l = (M_BOL_SUN - abs_mag) / 2.5 - offset
    return brentq(lambda m: _eker_log_l(m) - log_l, 0.18, 31.0, xtol=1e-14)


def fixed_point(P, a, m1, m2, band, offset=0.0):
    """The parallax [mas] solving plx = a (F / (P^2 (M1 + M2)))^(1/3), M_i at that plx."""
    def g(plx):
        shift = 5 + 5 * math.log10(plx * 1e-3)
        total = _mass(m1 + shift, band, offset) + _mass(m2 + shift, band, offset)
        return plx - 1e3 * a * (F / (P**2 * total)) ** (1 / 3)
    return brentq(g, 20.0, 300.0, xtol=1e-13)


def test_fixed_point_matches_brentq_on_the_defining_equation():
    # both stars on the 1.05-2.4 M_sun piece; both M dwarfs in 4 < M_Ks < 11
    for a, P, m1, m2, band in ((1.0, 40.0, 3.8, 4.4, "bol"), (0.5, 15.0, 6.0, 7.0, "K")):
        got = dynamical_parallax(a, P, m1, m2, band)
        assert got.converged
        assert got.parallax_mas[0] == pytest.approx(fixed_point(P, a, m1, m2, band), rel=1e-9)
    # a star 0.1 dex over-luminous for its mass (bol) / 2 % heavier for its M_Ks (K)
    got = dynamical_parallax(1.0, 40.0, 3.8, 4.4, "bol", 0.1, 0.1)
    assert got.parallax_mas[0] == pytest.approx(fixed_point(40, 1.0, 3.8, 4.4, "bol", 0.1),
                                                rel=1e-9)
    off = math.log10(1.02)
    got = dynamical_parallax(0.5, 15.0, 6.0, 7.0, "K", off, off)
    assert got.parallax_mas[0] == pytest.approx(fixed_point(15, 0.5, 6.0, 7.0, "K", off),
                                                rel=1e-9)


def _linear_sigma(fun, x0, sigmas):
    """First-order standard deviation of fun at x0 for independent inputs (central
    differences at a tenth of each sigma)."""
    var = 0.0
    for k, s in enumerate(sigmas):
        if s == 0:
            continue
        up, down = list(x0), list(x0)
        up[k] += 0.1 * s
        down[k] -= 0.1 * s
        var += ((fun(*up) - fun(*down)) / (0.2 * s) * s) ** 2
    return math.sqrt(var)


@pytest.mark.parametrize("band, a, P, mags", [("bol", 1.0, 40.0, (3.8, 0.05, 4.4, 0.08)),
                                              ("K", 0.5, 15.0, (6.0, 0.03, 7.0, 0.04))])
def test_interval_width_matches_independent_propagation(band, a, P, mags):
    # The Monte Carlo 68 % half-width of the parallax and the total mass against the
    # first-order propagation of sigma(P), sigma(a), the magnitudes' errors and the
    # relation's scatter (one deviation for both stars, as the method assumes) through
    # the brentq fixed point. 20000 draws: the half-width's own error is about 1 %.
    sp, sa = 0.4, 0.01
    rng = np.random.default_rng(21)
    n = 20000
    period, axis = rng.normal(P, sp, n), rng.normal(a, sa, n)
    blocks = mass_blocks(period, axis, magnitudes=mags, band=band, seed=5, best=(P, a))
    plx = blocks["parallax"]
    m1, e1, m2, e2 = mags
    sd = RELATION_SCATTER[band]["sigma_dex"]
    x0, sig = (P, a, m1, m2, 0.0), (sp, sa, e1, e2, sd)

    def plx_of(P_, a_, m1_, m2_, d_):
        return fixed_point(P_, a_, m1_, m2_, band, d_)

    def mass_of(P_, a_, m1_, m2_, d_):
        return F * (a_ / (1e-3 * plx_of(P_, a_, m1_, m2_, d_))) ** 3 / P_**2

    assert (plx["high"] - plx["low"]) / 2 == pytest.approx(_linear_sigma(plx_of, x0, sig),
                                                           rel=0.05)
    total = blocks["mass"]["total"]
    assert (total["high"] - total["low"]) / 2 == pytest.approx(
        _linear_sigma(mass_of, x0, sig), rel=0.05)
    assert plx["value"] == pytest.approx(plx_of(*x0), rel=3 * 1.25 * plx["error"]
                                         / plx["value"] / math.sqrt(n) + 1e-3)
    assert blocks["mass"]["seed"] == 5 and plx["magnitude_errors"] == [e1, e2]


def test_relation_scatter_alone_gives_a_real_width():
    # Exact orbit and magnitudes: the whole width is the relation's scatter. On one Eker
    # piece d log M = -d(offset) / alpha, and the parallax's feedback gives
    # d ln plx = d ln M / (3 - 2 / alpha)... with the offset moving M at fixed L:
    # ln plx changes by -ln(10) offset / alpha / (3 - 2 / alpha) (hand derivation, one
    # piece, alpha = 4.329).
    n = 20000
    blocks = mass_blocks(np.full(n, 40.0), np.full(n, 1.0), magnitudes=(3.8, 4.4),
                         band="bol", seed=2, best=(40.0, 1.0))
    plx = blocks["parallax"]
    alpha, sd = 4.329, RELATION_SCATTER["bol"]["sigma_dex"]
    rel = math.log(10) * sd / alpha / (3 - 2 / alpha)
    assert (plx["high"] - plx["low"]) / 2 / plx["value"] == pytest.approx(rel, rel=0.04)
    assert any("without errors" in w for w in blocks["warnings"])


def test_magnitude_errors_must_be_two_or_four_numbers():
    with pytest.raises(InputError, match="M1 M2 or M1 ERR1 M2 ERR2"):
        mass_blocks([40.0, 40.1], [1.0, 1.0], magnitudes=(3.8, 0.1, 4.4), band="bol")
    with pytest.raises(InputError, match="zero or positive"):
        mass_blocks([40.0, 40.1], [1.0, 1.0], magnitudes=(3.8, -0.1, 4.4, 0.1), band="bol")


def _elements_doc(tmp_path):
    doc = {"elements": {"P": {"value": 40.0, "error": 0.4, "unit": "yr"},
                        "T": {"value": 2010.0, "error": 0.1, "unit": "yr"},
                        "e": {"value": 0.4, "error": 0.01, "unit": ""},
                        "a": {"value": 1.0, "error": 0.01, "unit": "arcsec"},
                        "i": {"value": 60.0, "error": 1.0, "unit": "deg"},
                        "Omega": {"value": 100.0, "error": 1.0, "unit": "deg"},
                        "omega": {"value": 30.0, "error": 1.0, "unit": "deg"}}}
    path = tmp_path / "elements.json"
    path.write_text(json.dumps(doc))
    return path


def test_cli_prints_one_iteration_line_and_an_honest_interval(tmp_path, capsys):
    path = _elements_doc(tmp_path)
    assert main(["mass", str(path), "--magnitudes", "3.8", "0.05", "4.4", "0.08",
                 "--band", "bol", "--json", str(tmp_path / "m.json")]) == 0
    out = capsys.readouterr().out
    assert out.count("iteration at the best (P, a): converged after") == 1
    assert "step" not in out.split("Mass [M_sun]")[0].replace("steps", "")
    assert "relation scatter 0.1 dex in log10 L" in out
    doc = json.loads((tmp_path / "m.json").read_text())
    plx = doc["parallax"]
    assert (plx["high"] - plx["low"]) / plx["value"] > 0.02   # percent-level, not 1e-4
    assert main(["mass", str(path), "--magnitudes", "3.8", "0.05", "4.4", "--band",
                 "bol"]) == 2
    assert "M1 M2 or M1 ERR1 M2 ERR2" in capsys.readouterr().err


@pytest.mark.parametrize("band, says", [("bol", "assumed 0.1 dex"), ("K", "from memory")])
def test_an_unpublished_scatter_is_called_so_in_output_help_and_docs(tmp_path, capsys, band,
                                                                     says):
    # The Eker et al. 2018 scatter is assumed, not read from the paper; the Mann et al.
    # 2019 one is quoted from memory. The printed caveat, the JSON block, --help and the
    # document reference must all say so plainly.
    path = _elements_doc(tmp_path)
    mags = ["3.8", "0.05", "4.4", "0.08"] if band == "bol" else ["6.0", "0.05", "7.0", "0.05"]
    assert main(["mass", str(path), "--magnitudes", *mags, "--band", band,
                 "--json", str(tmp_path / "m.json")]) == 0
    out = capsys.readouterr().out
    assert out.count(says) >= 2          # the warning and the relation-scatter line
    doc = json.loads((tmp_path / "m.json").read_text())
    assert says in doc["parallax"]["relation_scatter"]["source"]
    with pytest.raises(SystemExit):
        main(["fit", "--help"])
    helped = " ".join(capsys.readouterr().out.split())
    assert ("scatter assumed, not the paper's" if band == "bol"
            else "scatter quoted from memory of the paper") in helped
    reference = " ".join((Path(__file__).parent.parent / "docs" / "result-document.md")
                         .read_text().split())
    assert ("is assumed, not a value of Eker et al. 2018" if band == "bol"
            else "quoted from memory of Mann et al. 2019") in reference
