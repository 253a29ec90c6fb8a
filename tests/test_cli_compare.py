"""``orbweigh compare``: two fits of independent halves agree; a wrong orbit is flagged."""
import json

import numpy as np
import pytest

from orbweigh.cli.main import main
from orbweigh.fitting import FitOptions, fit_orbit
from orbweigh.measurements import MeasurementSet
from synthetic import make_log

TRUTH = {"P": 12.0, "T": 2010.0, "e": 0.4, "a": 0.8, "i": 50.0, "Omega": 70.0,
         "omega": 120.0}


@pytest.fixture(scope="module")
def halves(tmp_path_factory):
    folder = tmp_path_factory.mktemp("halves")
    log = make_log(TRUTH, np.linspace(2000.0, 2024.0, 64), 0.5, 0.005, seed=10)
    paths = []
    for k, rows in enumerate((np.arange(0, 64, 2), np.arange(1, 64, 2))):   # alternate rows
        sub = MeasurementSet.from_arrays(log.epoch_yr[rows], log.theta_deg[rows],
                                         log.rho_arcsec[rows], log.sigma_theta_deg[rows],
                                         log.sigma_rho_arcsec[rows])
        doc = fit_orbit(sub, FitOptions(seed=1)).to_document()
        path = folder / f"half{k}.json"
        path.write_text(json.dumps(doc))
        paths.append(str(path))
    return paths


def _compare(capsys, argv):
    assert main(["compare"] + argv + ["--json", "-"]) == 0
    return json.loads(capsys.readouterr().out)


def test_independent_halves_agree_within_their_errors(halves, capsys, tmp_path):
    figure = tmp_path / "cmp.png"
    c = _compare(capsys, halves + ["--window", "J2025", "J2035", "--figure", str(figure)])
    assert set(c["elements"]) == set(TRUTH)
    for key, e in c["elements"].items():
        assert set(e) >= {"old", "new", "difference", "difference_sigma"}
        # Two independent fits of the same orbit: differences are unit normals in sigma;
        # |z| < 4 for all seven (common practice, no source).
        assert abs(e["difference_sigma"]) < 4, key
    assert c["max_separation_arcsec"] < 0.05
    assert c["max_separation_sigma"] < 4
    assert figure.read_bytes()[:4] == b"\x89PNG"


def test_a_wrong_orbit_is_flagged(halves, tmp_path, capsys):
    wrong = tmp_path / "wrong.toml"
    values = dict(TRUTH, a=0.9, omega=135.0)
    wrong.write_text("\n".join(f"{k} = {v}" for k, v in values.items()).replace(
        "T = 2010.0", 'T = "J2010.0"') + "\n")
    c = _compare(capsys, [str(wrong), halves[0], "--window", "J2025", "J2035"])
    assert c["elements"]["a"]["difference"] == pytest.approx(
        c["elements"]["a"]["new"] - 0.9)
    assert abs(c["elements"]["a"]["difference_sigma"]) > 5
    assert abs(c["elements"]["omega"]["difference_sigma"]) > 5
    assert c["max_separation_arcsec"] > 0.05 and c["max_separation_sigma"] > 10
    assert main(["compare", str(wrong), halves[0]]) == 0
    assert "the new orbit's 1-sigma band" in capsys.readouterr().out


def test_node_shift_is_not_a_difference(tmp_path, capsys):
    # The same apparent orbit with (Omega, omega) + 180 deg: positions are identical
    # (the node ambiguity of a visual orbit; Aitken 1935; memory).
    text = "\n".join(f"{k} = {v}" for k, v in TRUTH.items())
    a = tmp_path / "a.toml"
    b = tmp_path / "b.toml"
    a.write_text(text.replace("T = 2010.0", 'T = "J2010.0"') + "\n")
    b.write_text(text.replace("T = 2010.0", 'T = "J2022.0"').replace("Omega = 70.0", "Omega = 250.0")
                 .replace("omega = 120.0", "omega = 300.0") + "\n")
    c = _compare(capsys, [str(a), str(b), "--window", "J2025", "J2035"])
    for key in TRUTH:
        assert c["elements"][key]["difference"] == pytest.approx(0.0, abs=1e-9), key
    assert c["max_separation_arcsec"] < 1e-9
    assert c["max_separation_sigma"] is None   # no errors: no band
