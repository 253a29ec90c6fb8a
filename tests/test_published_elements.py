"""Published elements as input (--elements, --elements-file) and epochs in any scale."""
import json

import numpy as np
import pytest

from orbweigh.cli.main import main

MEEUS_TEXT = "P=41.623 T=1934.008 e=0.2763 a=0.907 i=59.025 Omega=23.717 omega=219.907"


def _json(capsys, argv):
    assert main(argv + ["--json", "-"]) == 0
    return json.loads(capsys.readouterr().out)


def test_meeus_57a_from_the_elements_option(capsys):
    assert main(["ephemeris", "--elements", MEEUS_TEXT, "--epochs", "1980.0"]) == 0
    out = capsys.readouterr().out
    row = [ln.split() for ln in out.splitlines() if ln.strip().startswith("1980")][0]
    # Meeus, Astronomical Algorithms, 2nd ed. (1998), ch. 57, Example 57.a:
    # theta = 318.4 deg, rho = 0.411" at 1980.0.
    assert float(row[1]) == pytest.approx(318.4, abs=0.05)
    assert float(row[2]) == pytest.approx(0.411, abs=0.0005)
    assert "no bands" in out


def test_epochs_in_any_scale_are_written_back_as_given(capsys):
    base = ["ephemeris", "--elements", MEEUS_TEXT]
    bessel = _json(capsys, base + ["--epochs", "1980.0"])["ephemeris"][0]
    # B1980.0 = JD 2415020.31352 + 80 x 365.242198781 = 2444239.6894
    # (B = 1900.0 + (JD - 2415020.31352)/365.242198781; Lieske 1979, A&A 73, 282; memory).
    jd = _json(capsys, base + ["--epochs", "JD2444239.6894"])
    assert jd["epoch_scale"] == "jd" and jd["ephemeris"][0]["epoch"] == 2444239.6894
    assert jd["ephemeris"][0]["theta_deg"] == pytest.approx(bessel["theta_deg"], abs=1e-4)
    julian = _json(capsys, base + ["--start", "J2031.9", "--stop", "J2032.9", "--step", "0.5"])
    assert julian["epoch_scale"] == "julian"
    assert [r["epoch"] for r in julian["ephemeris"]] == [2031.9, 2032.4, 2032.9]
    iso = _json(capsys, base + ["--epochs", "2031-01-01"])
    assert iso["epoch_scale"] == "iso"
    # 2031-01-01 0h = JD 2462867.5 (Meeus 1998, ch. 7 algorithm, worked by hand), written
    # back as a Julian year.
    assert iso["ephemeris"][0]["epoch"] == pytest.approx(2000 + (2462867.5 - 2451545.0)
                                                         / 365.25, abs=1e-9)


def test_errors_with_plus_minus_give_bands_from_independent_draws(tmp_path, capsys):
    toml = tmp_path / "eta_crb.toml"
    toml.write_text('name = "eta CrB"\nreference = "Meeus 1998, Example 57.a"\n'
                    'P = {value = 41.623, error = 0.05, unit = "yr"}\n'
                    'T = {value = 1934.008, error = 0.1}\ne = {value = 0.2763, error = 0.002}\n'
                    'a = {value = 0.907, error = 0.005, unit = "arcsec"}\ni = 59.025\n'
                    'Omega = 23.717\nomega = {value = 219.907, error = 0.5}\n')
    doc = _json(capsys, ["ephemeris", "--elements-file", str(toml), "--epochs", "1980.0,2030.0",
                         "--draws", "500", "--seed", "3"])
    assert doc["n_draws"] == 500 and doc["correlations"] == "unknown"
    assert "correlations are unknown" in doc["bands"]
    for r in doc["ephemeris"]:
        assert r["rho_low_arcsec"] < r["rho_arcsec"] < r["rho_high_arcsec"]
        assert np.mod(r["theta_high_deg"] - r["theta_low_deg"], 360.0) > 0.01
    # The same errors through the option: the same bands (same draws, same seed).
    text = ("P=41.623±0.05 T=1934.008+-0.1 e=0.2763±0.002 a=0.907±0.005 i=59.025 "
            "Omega=23.717 omega=219.907±0.5")
    opt = _json(capsys, ["ephemeris", "--elements", text, "--epochs", "1980.0,2030.0",
                         "--draws", "500", "--seed", "3"])
    assert opt["ephemeris"] == doc["ephemeris"]
    assert main(["ephemeris", "--elements", text, "--epochs", "2030"]) == 0
    assert "correlations are unknown" in capsys.readouterr().out
    # plan takes them too, epochs of the window in the Julian scale.
    plan = _json(capsys, ["plan", "--elements", text, "--window", "J2027", "J2040"])
    assert plan["epoch_scale"] == "julian" and "correlations unknown" in plan[
        "covariance_source"]
    mass = main(["mass", "--elements", text, "--parallax", "55.9", "0.8"])
    assert mass == 0
    # Third law: M = a^3 / (parallax^3 P^2) = (0.907/0.0559)^3 / 41.623^2 = 2.46 M_sun
    # (Kepler's third law in solar units; common practice, no source).
    assert "2.4" in capsys.readouterr().out


@pytest.mark.parametrize("argv, message", [
    (["--elements", "P=41.6 T=1934 e=0.27"], "missing"),
    (["--elements", MEEUS_TEXT + " X=3"], "unknown element 'X'"),
    (["--elements", MEEUS_TEXT.replace("e=0.2763", "e=1.3")], "outside its range"),
    (["--elements", MEEUS_TEXT.replace("P=41.623", "P=41.6±x")], "error of P"),
    (["--elements", MEEUS_TEXT, "--epochs", "2030,J2031"], "mixes epoch scales"),
    (["--elements", MEEUS_TEXT, "--epochs", "20x0"], "item 1"),
    (["--epochs", "2030"], "exactly one source of elements"),
])
def test_bad_elements_exit_2(capsys, argv, message):
    assert main(["ephemeris"] + argv) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_bad_elements_file_exit_2(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text("P = {value = 41.6, error = }\n")
    assert main(["ephemeris", "--elements-file", str(bad), "--epochs", "2030"]) == 2
    assert "not valid TOML" in capsys.readouterr().err
    bad.write_text("P = {value = 41.6, unit = 'd'}\n")
    assert main(["ephemeris", "--elements-file", str(bad), "--epochs", "2030"]) == 2
    assert "expected 'yr'" in capsys.readouterr().err


def test_equinox_of_date_against_the_classic_rate(tmp_path, capsys):
    base = ["ephemeris", "--elements", MEEUS_TEXT, "--epochs", "J2050.0"]
    j2000 = _json(capsys, base)
    assert j2000["theta_equinox"] == "J2000"
    coords = ["--target-ra", "90.0", "--target-dec", "30.0"]
    of_date = _json(capsys, base + ["--equinox", "date"] + coords)
    assert "equinox of date" in of_date["theta_equinox"]
    change = of_date["ephemeris"][0]["theta_deg"] - j2000["ephemeris"][0]["theta_deg"]
    # theta_date - theta_2000 = +0.00557 deg sin(alpha) sec(delta) per year (Aitken, The
    # Binary Stars, 1935; memory): 0.00557 x 1 / cos 30 deg x 50 yr = 0.3216 deg.
    assert change == pytest.approx(0.00557 / np.cos(np.radians(30.0)) * 50.0, rel=0.03)
    # Coordinates from the elements file give the same; the rho column is untouched.
    toml = tmp_path / "o.toml"
    toml.write_text("\n".join(MEEUS_TEXT.split()) + '\nra = "6h00m00s"\ndec = "+30d00m00s"\n')
    from_file = _json(capsys, ["ephemeris", "--elements-file", str(toml), "--epochs",
                               "J2050.0", "--equinox", "date"])
    assert from_file["ephemeris"][0]["theta_deg"] == pytest.approx(
        of_date["ephemeris"][0]["theta_deg"], abs=1e-9)
    assert from_file["ephemeris"][0]["rho_arcsec"] == j2000["ephemeris"][0]["rho_arcsec"]
    assert main(base + ["--equinox", "date"]) == 2
    assert "needs the pair's J2000 coordinates" in capsys.readouterr().err


def test_mass_takes_the_parallax_of_the_elements_file(tmp_path, capsys):
    toml = tmp_path / "p.toml"
    toml.write_text("P = {value = 41.623, error = 0.05}\nT = 1934.008\ne = 0.2763\n"
                    "a = {value = 0.907, error = 0.005}\ni = 59.025\nOmega = 23.717\n"
                    "omega = 219.907\nparallax = {value = 55.9, error = 0.8}\n")
    assert main(["mass", "--elements-file", str(toml), "--json", "-"]) == 0
    out = capsys.readouterr().out
    doc = json.loads(out[out.index("{"):])
    # M = (a / parallax)^3 / P^2 = (0.907 / 0.0559)^3 / 41.623^2 = 2.465 M_sun (Kepler's
    # third law in solar units; common practice, no source).
    assert doc["mass"]["total"]["value"] == pytest.approx(
        (0.907 / 0.0559) ** 3 / 41.623 ** 2, rel=0.01)
