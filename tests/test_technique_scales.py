"""Sigma factors by technique (fit --technique-scales) on synthetic logs from
tests/synthetic.py (independent of orbweigh's model: brentq Kepler solutions and 3-D
rotation matrices), whose stated sigmas are wrong by known factors."""
import json

import numpy as np
import pytest

from orbweigh.cli.main import main
from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.measurements import MeasurementSet
from orbweigh.result import validate_document
from synthetic import make_log

TRUTH = dict(P=24.0, T=2015.0, e=0.5, a=0.85, i=48.0, Omega=112.0, omega=250.0)
#: True noise of each technique: (sigma_theta [deg], sigma_rho [arcsec]).
NOISE = {"micrometer": (1.0, 0.05), "speckle": (0.3, 0.004), "photographic": (0.5, 0.02)}
#: Stated sigma = true sigma / factor: the factor the fit must recover.
WRONG_BY = {"micrometer": 2.5, "speckle": 0.5, "photographic": 2.0}


def _log(counts, seed=3, stated=True):
    """Techniques observed one after another over 60 yr; sigmas stated wrong if ``stated``."""
    technique = np.concatenate([[k] * n for k, n in counts.items()])
    t = np.linspace(1960.0, 2020.0, technique.size)
    true_theta = np.array([NOISE[k][0] for k in technique])
    true_rho = np.array([NOISE[k][1] for k in technique])
    log = make_log(TRUTH, t, true_theta, true_rho, seed=seed)
    wrong = np.array([WRONG_BY[k] for k in technique]) if stated else np.ones(technique.size)
    return MeasurementSet.from_arrays(log.epoch_yr, log.theta_deg, log.rho_arcsec,
                                      true_theta / wrong, true_rho / wrong, technique=technique)


def test_factors_recovered_within_their_statistical_error():
    # chi2_k / dof_k has variance 2 / dof_k for Gaussian errors (chi-square distribution),
    # so the factor's relative error is 1/sqrt(2 dof_k) ~ 1/sqrt(4 n_k): 8 % for 40 points.
    sol = fit_orbit(_log({"micrometer": 40, "speckle": 40}),
                    FitOptions(technique_scales=True))
    scales = sol.statistics["technique_scales"]
    assert scales["converged"] and scales["rounds"] <= 20
    for name in ("micrometer", "speckle"):
        f = scales["factors"][name]
        assert f["n_points"] == 40 and f["estimated"]
        assert f["error"] == pytest.approx(f["factor"] / np.sqrt(4 * 40), rel=0.05)
        # within 3 statistical errors of the planted factor (common practice, no source)
        assert abs(f["factor"] - WRONG_BY[name]) < 3 * f["error"], name
        # after scaling, each technique's reduced chi2 is one (the defining condition)
        assert sol.statistics["techniques"][name]["reduced_chi2"] == pytest.approx(1, abs=0.03)


def test_element_errors_become_those_of_correct_sigmas():
    # The same noise with the true sigmas stated, fitted without factors: the scaled fit's
    # elements and errors must agree with it to within the factors' ~8 % error.
    scaled = fit_orbit(_log({"micrometer": 40, "speckle": 40}),
                       FitOptions(technique_scales=True))
    right = fit_orbit(_log({"micrometer": 40, "speckle": 40}, stated=False))
    plain = fit_orbit(_log({"micrometer": 40, "speckle": 40}))
    for key in ("P", "e", "a", "i"):
        assert scaled.errors[key] == pytest.approx(right.errors[key], rel=0.15), key
        # the truth within 3 sigma (common practice, no source)
        assert abs(scaled.elements.to_keys()[key] - TRUTH[key]) < 3 * scaled.errors[key], key
    # the stated sigmas overweight the micrometer: the unscaled fit's global reduced-chi2
    # scaling cannot repair that, its errors are off by far more than 15 %
    assert abs(plain.errors["a"] / right.errors["a"] - 1) > 0.3


def test_a_technique_with_three_points_keeps_factor_one_and_is_named():
    counts = {"micrometer": 30, "photographic": 3, "speckle": 30}
    sol = fit_orbit(_log(counts), FitOptions(technique_scales=True))
    photo = sol.statistics["technique_scales"]["factors"]["photographic"]
    assert photo == {"factor": 1.0, "error": None, "n_points": 3, "estimated": False}
    assert any("photographic (3 points)" in w and "kept at 1" in w for w in sol.warnings)
    # its rows keep their stated sigmas; the others carry their factor
    doc = sol.to_document()
    validate_document(json.loads(json.dumps(doc)), "<memory>")
    rows = {r["technique"]: r for r in doc["residuals"]}
    assert rows["photographic"]["sigma_factor"] == 1.0
    assert rows["photographic"]["sigma_theta_deg"] == pytest.approx(0.5 / 2.0)
    f = sol.statistics["technique_scales"]["factors"]["micrometer"]["factor"]
    assert rows["micrometer"]["sigma_theta_deg"] == pytest.approx(1.0 / 2.5 * f)


def test_per_technique_statistics_without_the_option():
    # rms by technique against a direct computation from the residual rows
    sol = fit_orbit(_log({"micrometer": 30, "speckle": 30}, stated=False))
    doc = sol.to_document()
    assert "technique_scales" not in doc["statistics"]
    used = [r for r in doc["residuals"] if r["status"] == "used"]
    for name in ("micrometer", "speckle"):
        rows = [r for r in used if r["technique"] == name]
        t = doc["statistics"]["techniques"][name]
        assert t["n_points"] == len(rows)
        assert t["rms_theta_deg"] == pytest.approx(np.sqrt(np.mean(
            [r["d_theta_deg"] ** 2 for r in rows])))
        chi2 = sum((r["d_theta_deg"] / r["sigma_theta_deg"]) ** 2
                   + (r["d_rho_arcsec"] / r["sigma_rho_arcsec"]) ** 2 for r in rows)
        assert t["chi2"] == pytest.approx(chi2)
    # the dof shares add up to the fit's degrees of freedom
    total = sum(t["dof"] for t in doc["statistics"]["techniques"].values())
    assert total == pytest.approx(doc["statistics"]["dof"])


def test_validation_refuses_a_bad_factor_block():
    doc = fit_orbit(_log({"micrometer": 30, "photographic": 3, "speckle": 30}),
                    FitOptions(technique_scales=True)).to_document()
    doc = json.loads(json.dumps(doc))
    doc["statistics"]["technique_scales"]["factors"]["photographic"]["factor"] = 1.3
    with pytest.raises(Exception, match="factors.photographic"):
        validate_document(doc, "<memory>")
    doc["statistics"]["technique_scales"]["factors"]["photographic"]["factor"] = 1.0
    doc["statistics"]["technique_scales"]["factors"]["speckle"]["factor"] = -1.0
    with pytest.raises(Exception, match="factors.speckle.factor"):
        validate_document(doc, "<memory>")


def _write_csv(path, data):
    lines = ["epoch,theta,rho,sigma_theta,sigma_rho,technique"]
    lines += [f"{t:.4f},{th:.3f},{r:.5f},{st:.4f},{sr:.5f},{k}" for t, th, r, st, sr, k in zip(
        data.epoch_yr, data.theta_deg, data.rho_arcsec, data.sigma_theta_deg,
        data.sigma_rho_arcsec, data.technique)]
    path.write_text("\n".join(lines) + "\n")


def test_cli_prints_factors_and_per_technique_rows(tmp_path, capsys):
    log = tmp_path / "pair.csv"
    _write_csv(log, _log({"micrometer": 30, "photographic": 3, "speckle": 30}))
    assert main(["fit", str(log), "--technique-scales", "--json", str(tmp_path / "r.json")]) == 0
    out = capsys.readouterr().out
    assert "By technique" in out and "sigma factor" in out
    assert "1 (kept: fewer than 5 points)" in out
    assert "sigma factors converged after" in out
    doc = json.loads((tmp_path / "r.json").read_text())
    assert doc["options"]["technique_scales"] is True
    assert main(["fit", str(log)]) == 0
    out = capsys.readouterr().out
    assert "By technique" in out and "sigma factor" not in out


def test_stated_factor_error_matches_the_spread_over_independent_logs():
    # 12 independent logs: the recovered factors scatter about the planted ones as their
    # stated errors say. 24 z-values: for a correct error their sum of squares is
    # chi-square with 24 dof, below 0.36 x 24 with probability 0.0017 and above 2.25 x 24
    # with 0.0004 (scipy.stats.chi2), so their rms lies in [0.6, 1.5]. Measured: 1.02.
    z = []
    for seed in range(100, 112):
        sol = fit_orbit(_log({"micrometer": 30, "speckle": 30}, seed=seed),
                        FitOptions(technique_scales=True))
        for name, f in sol.statistics["technique_scales"]["factors"].items():
            z.append((f["factor"] - WRONG_BY[name]) / f["error"])
    rms = float(np.sqrt(np.mean(np.square(z))))
    assert 0.6 < rms < 1.5, z
