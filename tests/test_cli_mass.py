"""Tests of the ``orbweigh mass`` command on a hand-built result document."""
import json
from pathlib import Path

import numpy as np
import pytest

from orbweigh.cli.main import main

FIXTURE = Path(__file__).parent / "data" / "mass_sirius.json"
# Sirius AB, Bond et al. 2017, ApJ 840, 70: M_A = 2.063, M_B = 1.018 M_sun with the
# Hipparcos 2007 parallax 379.21 +/- 1.58 mas; our total is 0.24 % low: tolerance 0.5 %.
SIRIUS_TOTAL, SIRIUS_A, SIRIUS_B = 2.063 + 1.018, 2.063, 1.018


def _run(capsys, *argv):
    status = main(["mass", *map(str, argv)])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return status, out, err


def test_mass_from_covariance_writes_document(tmp_path, capsys):
    out_path = tmp_path / "with_mass.json"
    status, out, _ = _run(capsys, FIXTURE, "--parallax", 379.21, 1.58,
                          "--mass-ratio", SIRIUS_B / SIRIUS_A, 0.0, "--json", out_path)
    assert status == 0
    doc = json.loads(out_path.read_text())
    original = json.loads(FIXTURE.read_text())
    for key, value in original.items():  # every input key kept unchanged
        assert doc[key] == value
    assert "_path" not in doc
    mass = doc["mass"]
    assert mass["total"]["value"] == pytest.approx(SIRIUS_TOTAL, rel=0.005)
    assert mass["primary"]["value"] == pytest.approx(SIRIUS_A, rel=0.005)
    assert mass["secondary"]["value"] == pytest.approx(SIRIUS_B, rel=0.005)
    assert mass["total"]["unit"] == "solMass" and mass["seed"] == 1 and mass["draws"] == 4000
    assert mass["draws_source"] == "covariance"
    # 3 x 1.58 / 379.21 = 1.25 % from the parallax (first-order propagation, common practice).
    assert mass["total"]["linear"]["error"] / mass["total"]["linear"]["value"] == \
        pytest.approx(0.0125, rel=0.05)
    assert mass["budget"]["parallax"] > 0.95
    assert doc["parallax"] == {"value": 379.21, "error": 1.58, "unit": "mas",
                               "kind": "trigonometric"}
    assert f"{mass['total']['value']:.4g}" in out and "seed 1" in out


def test_json_to_stdout_table_to_stderr(capsys):
    status, out, err = _run(capsys, FIXTURE, "--parallax", 379.21, 1.58, "--json", "-",
                            "--seed", 5, "--draws", 500)
    assert status == 0
    doc = json.loads(out)
    assert doc["mass"]["seed"] == 5 and doc["mass"]["draws"] == 500
    assert doc["mass"]["total"]["value"] == pytest.approx(SIRIUS_TOTAL, rel=0.005)
    assert "seed 5" in err


@pytest.mark.parametrize("plx", ["0", "-2.5"])
def test_nonpositive_parallax_exits_2(capsys, plx):
    status, _, err = _run(capsys, FIXTURE, "--parallax", plx, 1.0)
    assert status == 2 and "not positive" in err


def test_needs_a_distance(capsys):
    status, _, err = _run(capsys, FIXTURE)
    assert status == 2 and "--parallax VALUE ERROR" in err


def test_v_band_refused_with_supported_list(capsys):
    status, _, err = _run(capsys, FIXTURE, "--magnitudes", 1.5, 8.4, "--band", "V")
    assert status == 2 and "'bol'" in err and "'K'" in err


def test_missing_file_exits_2(tmp_path, capsys):
    status, _, err = _run(capsys, tmp_path / "nowhere.json", "--parallax", 10, 1)
    assert status == 2 and "cannot read" in err


def test_posterior_draws_file_is_used(tmp_path, capsys):
    from astropy.table import Table
    doc = json.loads(FIXTURE.read_text())
    del doc["covariance"]
    rng = np.random.default_rng(8)
    keys = ["P", "T", "e", "a", "i", "Omega", "omega"]
    values = [doc["elements"][k]["value"] for k in keys]
    values[1] = 1994.5715  # T as a Julian year, close enough for the mass
    table = Table({k: rng.normal(v, 1e-3 * abs(v) + 1e-4, 300) for k, v in zip(keys, values)})
    table.write(tmp_path / "draws.ecsv", format="ascii.ecsv")
    doc["posterior"] = {"draws_file": "draws.ecsv"}
    (tmp_path / "result.json").write_text(json.dumps(doc))
    status, out, _ = _run(capsys, tmp_path / "result.json", "--parallax", 379.21, 1.58,
                          "--json", "-")
    assert status == 0
    mass = json.loads(out[out.index("{"):])["mass"]
    assert mass["draws_source"] == "posterior draws" and mass["draws"] == 300
    # P and a with 0.1 % spread add 0.3 % to the 1.25 % of the parallax.
    assert mass["total"]["value"] == pytest.approx(SIRIUS_TOTAL, rel=0.006)


def test_without_covariance_uses_element_errors_and_says_so(tmp_path, capsys):
    doc = json.loads(FIXTURE.read_text())
    del doc["covariance"]
    (tmp_path / "result.json").write_text(json.dumps(doc))
    status, out, _ = _run(capsys, tmp_path / "result.json", "--parallax", 379.21, 1.58)
    assert status == 0 and "no covariance matrix" in out
    assert "element errors" in out


def test_dynamical_parallax_from_k_magnitudes(tmp_path, capsys):
    # Two M dwarfs of M_Ks = 6 and 8 (Mann et al. 2019, ApJ 871, 63) at 100 mas, P = 12 yr.
    from orbweigh.masses import mann_mass_from_mks
    m1, m2 = mann_mass_from_mks(6.0), mann_mass_from_mks(8.0)
    a = 0.1 * ((m1 + m2) * 144.0 / 1.0000378) ** (1 / 3)  # third law, f from IAU values
    doc = json.loads(FIXTURE.read_text())
    doc["elements"]["P"].update(value=12.0, error=0.01)
    doc["elements"]["a"].update(value=a, error=1e-4)
    del doc["covariance"]
    (tmp_path / "result.json").write_text(json.dumps(doc))
    # At 10 pc the apparent magnitude equals the absolute one.
    status, out, _ = _run(capsys, tmp_path / "result.json", "--magnitudes", 6.0, 8.0,
                          "--band", "K", "--json", "-")
    assert status == 0
    result = json.loads(out[out.index("{"):])
    assert result["parallax"]["kind"] == "dynamical"
    assert result["parallax"]["value"] == pytest.approx(100.0, rel=1e-3)
    assert result["mass"]["primary"]["value"] == pytest.approx(m1, rel=1e-3)
    assert result["parallax"]["iterations"] > 2


def test_band_without_magnitudes_refused(capsys):
    status, _, err = _run(capsys, FIXTURE, "--parallax", 379.21, 1.58, "--band", "K")
    assert status == 2 and "--band describes --magnitudes" in err
