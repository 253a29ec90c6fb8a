"""The ``orbweigh ephemeris`` command: table, JSON, ECSV, bands, epoch scales, bad input."""
import json

import numpy as np
import pytest

from orbweigh.cli.main import main
from orbweigh.elements import ELEMENT_KEYS, CampbellElements
from orbweigh.planning import position_jacobian

# Meeus, Astronomical Algorithms, 2nd ed. (1998), ch. 57, Example 57.a (the elements).
MEEUS = {"P": 41.623, "T": 1934.008, "e": 0.2763, "a": 0.907, "i": 59.025,
         "Omega": 23.717, "omega": 219.907}
UNITS = {"P": "yr", "T": "yr", "e": "", "a": "arcsec", "i": "deg", "Omega": "deg",
         "omega": "deg"}
# A synthetic pair observed at 5 mas from 2012 to 2026 (its periastron, 2030, unobserved).
TRUE = CampbellElements(20.0, 2030.0, 0.6, 0.5, 50.0, 100.0, 60.0)


def _document(values, scale=None, covariance=None):
    elements = {k: {"value": v, "unit": UNITS[k]} for k, v in values.items()}
    if scale:
        elements["T"]["scale"] = scale
    doc = {"elements": elements}
    if covariance is not None:
        doc["covariance"] = {"parameters": list(ELEMENT_KEYS), "matrix": covariance.tolist()}
    return doc


def _write(tmp_path, doc, name="result.json"):
    path = tmp_path / name
    path.write_text(json.dumps(doc))
    return str(path)


def _fisher_covariance(elements, epochs, sigma=0.005):
    """Covariance of a least-squares fit of (x, y) at ``epochs`` with precision sigma:
    (sum J^T J / sigma^2)^-1 (Gauss-Markov theorem; common practice)."""
    jac = position_jacobian(elements, epochs)
    return np.linalg.inv(np.einsum("mki,mkj->ij", jac, jac) / sigma**2)


def _json_rows(capsys, argv):
    assert main(argv + ["--json", "-"]) == 0
    return json.loads(capsys.readouterr().out)


def test_meeus_example_through_the_command(tmp_path, capsys):
    path = _write(tmp_path, _document(MEEUS))
    assert main(["ephemeris", path, "--epochs", "1980.0"]) == 0
    out = capsys.readouterr().out
    row = [line.split() for line in out.splitlines() if line.strip().startswith("1980")][0]
    # Meeus 1998, ch. 57, Example 57.a: theta = 318.4 deg, rho = 0.411" at 1980.0.
    assert float(row[1]) == pytest.approx(318.4, abs=0.05)
    assert float(row[2]) == pytest.approx(0.411, abs=0.0005)
    doc = _json_rows(capsys, ["ephemeris", path, "--epochs", "1980.0"])
    assert doc["ephemeris"][0]["theta_deg"] == pytest.approx(318.4, abs=0.05)
    assert doc["ephemeris"][0]["rho_arcsec"] == pytest.approx(0.411, abs=0.0005)


def test_grid_json_and_ecsv_agree(tmp_path, capsys):
    from astropy.table import Table
    path = _write(tmp_path, _document(MEEUS))
    ecsv, js = tmp_path / "eph.ecsv", tmp_path / "eph.json"
    assert main(["ephemeris", path, "--start", "2027", "--stop", "2040", "--step", "0.5",
                 "--json", str(js), "--ecsv", str(ecsv)]) == 0
    table_text = capsys.readouterr().out
    rows = json.loads(js.read_text())["ephemeris"]
    # 2027, 2027.5, ..., 2040: 27 epochs, written back exactly as asked.
    assert [r["epoch"] for r in rows] == [2027 + 0.5 * k for k in range(27)]
    assert set(rows[0]) == {"epoch", "theta_deg", "rho_arcsec", "x_arcsec", "y_arcsec"}
    assert len([ln for ln in table_text.splitlines() if ln.strip()[:4].isdigit()]) == 27
    table = Table.read(ecsv, format="ascii.ecsv")
    assert str(table["theta_deg"].unit) == "deg" and str(table["rho_arcsec"].unit) == "arcsec"
    assert str(table["epoch"].unit) == "yr" and table.meta["epoch_scale"] == "besselian"
    np.testing.assert_array_equal(table["rho_arcsec"], [r["rho_arcsec"] for r in rows])
    for r in rows:   # x = rho cos theta (North), y = rho sin theta (East): the trade's axes
        assert r["x_arcsec"] == pytest.approx(r["rho_arcsec"] * np.cos(np.radians(r["theta_deg"])))
        assert r["y_arcsec"] == pytest.approx(r["rho_arcsec"] * np.sin(np.radians(r["theta_deg"])))


def test_epochs_follow_the_scale_of_T(tmp_path, capsys):
    # B1950.0 = JD 2433282.4235 (Lieske 1979, A&A 73, 282; memory). The same orbit written
    # with T as a Besselian year and as a Julian date must give the same positions when the
    # command's epochs are given in each document's scale.
    bessel = dict(MEEUS, T=1950.0)
    julian_date = dict(MEEUS, T=2433282.4235)
    p1 = _write(tmp_path, _document(bessel), "b.json")
    p2 = _write(tmp_path, _document(julian_date, scale="jd"), "jd.json")
    r1 = _json_rows(capsys, ["ephemeris", p1, "--epochs", "1950.0,1960.0"])["ephemeris"]
    # B1960.0 - B1950.0 = 10 tropical years of 365.2421988 d (Newcomb; memory).
    r2 = _json_rows(capsys, ["ephemeris", p2, "--epochs",
                             f"2433282.4235,{2433282.4235 + 3652.421988}"])["ephemeris"]
    for a, b in zip(r1, r2):
        assert a["theta_deg"] == pytest.approx(b["theta_deg"], abs=1e-5)
        assert a["rho_arcsec"] == pytest.approx(b["rho_arcsec"], abs=1e-7)
    assert r2[0]["epoch"] == 2433282.4235   # written back as a JD, as given
    # At T itself the companion is at periastron: x = A (1 - e), y = B (1 - e).
    A, B, _, _ = CampbellElements.from_keys(MEEUS).thiele_innes()
    assert r1[0]["x_arcsec"] == pytest.approx(A * (1 - MEEUS["e"]), abs=1e-9)
    assert r1[0]["y_arcsec"] == pytest.approx(B * (1 - MEEUS["e"]), abs=1e-9)


@pytest.fixture
def partial_orbit(tmp_path):
    cov = _fisher_covariance(TRUE, np.linspace(2012.0, 2026.0, 30))
    values = dict(zip(ELEMENT_KEYS, TRUE.as_tuple()))
    return _write(tmp_path, _document(values, scale="julian", covariance=cov))


def test_bands_contain_the_prediction_and_widen_away_from_the_data(partial_orbit, capsys):
    doc = _json_rows(capsys, ["ephemeris", partial_orbit, "--start", "2012", "--stop", "2046",
                              "--step", "0.5", "--seed", "7", "--draws", "800"])
    assert doc["seed"] == 7 and doc["n_draws"] == 800
    rows = doc["ephemeris"]
    t = np.array([r["epoch"] for r in rows])
    theta = np.array([r["theta_deg"] for r in rows])
    lo, hi = (np.array([r[k] for r in rows]) for k in ("theta_low_deg", "theta_high_deg"))
    rlo, rhi = (np.array([r[k] for r in rows]) for k in ("rho_low_arcsec", "rho_high_arcsec"))
    rho = np.array([r["rho_arcsec"] for r in rows])
    # theta band: the arc from low to high through increasing theta contains theta.
    width = np.mod(hi - lo, 360.0)
    assert np.all(np.mod(theta - lo, 360.0) <= width)
    assert np.all((rlo <= rho) & (rho <= rhi))
    # Across-track width rho * dtheta [arcsec]: within the data span it is near the 5 mas
    # precision of the data; a period later (2032-2046) the extrapolation is far looser.
    across = rho * np.radians(width)
    inside = (t >= 2014) & (t <= 2024)
    later = (t >= 2034) & (t <= 2046)
    assert across[inside].max() < 0.01
    assert np.median(across[later]) > 3 * np.median(across[inside])
    assert np.median((rhi - rlo)[later]) > 3 * np.median((rhi - rlo)[inside])


def test_seed_fixes_the_bands(partial_orbit, capsys):
    argv = ["ephemeris", partial_orbit, "--epochs", "2031.0", "--draws", "200"]
    a = _json_rows(capsys, argv + ["--seed", "3"])["ephemeris"][0]
    b = _json_rows(capsys, argv + ["--seed", "3"])["ephemeris"][0]
    c = _json_rows(capsys, argv + ["--seed", "4"])["ephemeris"][0]
    assert a == b
    assert a["rho_low_arcsec"] != c["rho_low_arcsec"]


@pytest.mark.parametrize("argv, message", [
    (["--start", "2040", "--stop", "2027"], "must be earlier than --stop"),
    (["--start", "2027", "--stop", "2040", "--step", "0"], "--step must be positive"),
    (["--start", "2027", "--stop", "2040", "--step", "0.0001"], "more than 100,000"),
    (["--epochs", "2027.3,20x1.9"], "item 2 ('20x1.9')"),
    (["--epochs", "2027.3,,2030"], "item 2 ('')"),
    (["--epochs", "2027.3", "--start", "2027"], "not both"),
    ([], "give either --start and --stop"),
    (["--epochs", "2030", "--draws", "1"], "--draws 1 is outside 2..10,000"),
])
def test_bad_options_exit_2_with_a_message(tmp_path, capsys, argv, message):
    path = _write(tmp_path, _document(MEEUS))
    assert main(["ephemeris", path] + argv) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_bad_documents_exit_2(tmp_path, capsys):
    missing = dict(MEEUS)
    del missing["omega"]
    path = _write(tmp_path, _document(missing))
    assert main(["ephemeris", path, "--epochs", "2030"]) == 2
    assert "'elements.omega' is missing" in capsys.readouterr().err
    bad = tmp_path / "bad.json"
    bad.write_text('{"elements": {"P": 1,}}')
    assert main(["ephemeris", str(bad), "--epochs", "2030"]) == 2
    assert "line 1: not valid JSON" in capsys.readouterr().err



@pytest.mark.parametrize("matrix, message", [
    (np.diag([1.0, 1, 1, 1, 1, 1, np.nan]), "non-finite"),
    (np.diag([1.0, 1, 1, -1, 1, 1, 1]), "not symmetric positive semi-definite"),
    (np.eye(2), "the matrix is 2x2 but 7 parameters are named"),
])
def test_broken_covariance_blocks_exit_2(tmp_path, capsys, matrix, message):
    doc = _document(MEEUS)
    doc["covariance"] = {"parameters": list(ELEMENT_KEYS), "matrix": matrix.tolist()}
    path = _write(tmp_path, doc)
    for command in (["ephemeris", path, "--epochs", "2030"],
                    ["plan", path, "--window", "2027", "2030"]):
        assert main(command) == 2
        err = capsys.readouterr().err
        assert message in err and "Traceback" not in err
