"""Epochs as written in logs, and precession of position angles to equinox J2000."""
import numpy as np
import pytest

from orbweigh.errors import InputError
from orbweigh.reductions import (EPOCH_SCALES, approx_theta_correction_deg, parse_declination,
                                 parse_epoch, parse_epochs, parse_right_ascension,
                                 parse_target_coordinates, precess_theta_to_date,
                                 precess_theta_to_j2000, split_epoch, to_julian_year,
                                 from_julian_year)

J2000_JD = 2451545.0  # IAU 1976 definition of J2000.0 (memory)
B1950_JD = 2433282.4235  # B1950.0, IAU definition (Lieske 1979, A&A 73, 282; memory)
DAY_YR = 1.0 / 365.25  # one day in Julian years (definition of the Julian year)


def jyear_from_jd(jd):
    return 2000.0 + (jd - J2000_JD) / 365.25


def jd_of_date(y, m, d):
    """JD at 0h of a Gregorian date, 1901-2099 (almanac integer formula; memory)."""
    return 367 * y - (7 * (y + (m + 9) // 12)) // 4 + (275 * m) // 9 + d + 1721013.5


def test_b1950_matches_iau_definition():
    t, scale = parse_epoch("B1950.0")
    assert scale == "besselian"
    assert t == pytest.approx(jyear_from_jd(B1950_JD), abs=1e-4 * DAY_YR)


def test_plain_year_is_besselian_by_lieske_formula():
    # Besselian year B = 1900 + (JD - 2415020.31352) / 365.242198781 (Lieske 1979; memory)
    t, scale = parse_epoch("1934.5")
    jd = 2415020.31352 + (1934.5 - 1900.0) * 365.242198781
    assert scale == "besselian"
    assert t == pytest.approx(jyear_from_jd(jd), abs=1e-3 * DAY_YR)


@pytest.mark.parametrize("text, jd, scale", [
    ("J2000.0", J2000_JD, "julian"),
    ("JD2451545.0", J2000_JD, "jd"),
    ("2451545.0", J2000_JD, "jd"),                       # bare number > 100000 is a JD
    ("MJD51544.5", 51544.5 + 2400000.5, "mjd"),          # MJD = JD - 2400000.5 (definition)
    ("2000-01-01T12:00", J2000_JD, "iso"),               # J2000.0 is 2000 Jan 1 12h TT
    ("1934-05-17", jd_of_date(1934, 5, 17), "iso"),
    ("J1988.25", J2000_JD + (1988.25 - 2000) * 365.25, "julian"),
])
def test_epoch_kinds_against_jd(text, jd, scale):
    t, got_scale = parse_epoch(text)
    assert got_scale == scale and scale in EPOCH_SCALES
    assert t == pytest.approx(jyear_from_jd(jd), abs=1e-6 * DAY_YR)


def test_day_unit_reads_small_numbers_as_mjd():
    assert split_epoch("51544.5", day_unit=True) == (51544.5, "mjd")
    assert split_epoch("2451545.0", day_unit=True) == (2451545.0, "jd")


@pytest.mark.parametrize("text, match", [
    ("19O6.0", "cannot read '19O6.0' as an epoch; write a decimal year"),
    ("1934-13-01", "looks like an ISO date but is not a valid one"),
    ("51544.5", "outside 1500-2500; if it is a day count give it a prefix"),
    ("inf", "not a finite number"),
])
def test_bad_epochs(text, match):
    with pytest.raises(ValueError, match=match):
        parse_epoch(text)


def test_parse_epochs_vectorised_and_names_index():
    t, scales = parse_epochs(["J2000.0", "MJD51544.5", "B1950.0"])
    assert t == pytest.approx([2000.0, 2000.0, jyear_from_jd(B1950_JD)], abs=1e-4 * DAY_YR)
    assert list(scales) == ["julian", "mjd", "besselian"]
    with pytest.raises(ValueError, match="epoch 1: cannot read 'x'"):
        parse_epochs(["2000.0", "x"])


def test_target_coordinates_sexagesimal():
    ra, dec = parse_target_coordinates("06:45:08.9", "-16:42:58")
    # 6h45m08.9s = 15 * (6 + 45/60 + 8.9/3600) deg; -(16 + 42/60 + 58/3600) deg (arithmetic)
    assert ra == pytest.approx(15 * (6 + 45 / 60 + 8.9 / 3600), abs=1e-10)
    assert dec == pytest.approx(-(16 + 42 / 60 + 58 / 3600), abs=1e-10)
    assert parse_target_coordinates("101.25", -16.5) == (101.25, -16.5)
    with pytest.raises(InputError, match="target RA 'abc' is neither degrees nor sexagesimal"):
        parse_target_coordinates("abc", "10")
    with pytest.raises(InputError, match=r"Dec 95.0 deg is outside \(-90, 90\)"):
        parse_target_coordinates(10, 95)


@pytest.mark.parametrize("ra, dec, t", [(100.0, 40.0, 1900.0), (100.0, 40.0, 1800.0),
                                        (250.0, -60.0, 1900.0), (60.0, 20.0, 2100.0)])
def test_rigorous_matches_linear_formula_away_from_pole(ra, dec, t):
    # classic linear correction (Aitken, The Binary Stars, 1935; memory): agrees to a few %
    theta = np.array([0.0, 123.0, 250.0])
    change = (precess_theta_to_j2000(theta, t, ra, dec) - theta + 180.0) % 360.0 - 180.0
    approx = approx_theta_correction_deg(t, ra, dec)
    assert change == pytest.approx(np.full(3, approx), rel=0.03)


def test_rigorous_rate_is_precession_in_declination():
    # at alpha = 90 deg, delta = 0 the rate is n = 2004.3109 arcsec per Julian century
    # (IAU 1976 precession, Lieske et al. 1977; memory); sign as in the linear formula
    n_deg_per_yr = 2004.3109 / 3600.0 / 100.0
    change = precess_theta_to_j2000(10.0, 1990.0, 90.0, 0.0) - 10.0
    assert change == pytest.approx(-n_deg_per_yr * (1990.0 - 2000.0), rel=2e-4)


def test_linear_formula_fails_near_pole():
    # near the pole the pair's RA moves fast and the linear form is off by tens of per cent
    change = precess_theta_to_j2000(0.0, 1880.0, 30.0, -88.0)
    approx = approx_theta_correction_deg(1880.0, 30.0, -88.0)
    assert abs(change / approx - 1.0) > 0.1


def test_no_change_at_j2000_and_vectorised_shape():
    theta = np.array([[0.0, 90.0], [180.0, 359.9]])
    out = precess_theta_to_j2000(theta, 2000.0, 200.0, 30.0)
    assert out.shape == theta.shape
    assert out == pytest.approx(theta, abs=1e-8)  # identity at equinox J2000 (definition)


def _astropy_precessed(theta, t, ra, dec):
    """Reference: astropy's FK5 frames, the pair carried to the equinox of date and a
    point 1 arcsec along theta carried back (error of the construction ~1e-8 deg)."""
    import astropy.units as u
    from astropy.coordinates import FK5, SkyCoord
    from astropy.time import Time

    j2000 = FK5(equinox=Time(2000.0, format="jyear", scale="tt"))
    of_date = FK5(equinox=Time(t, format="jyear", scale="tt"))
    star = SkyCoord(np.full(t.size, ra) * u.deg, np.full(t.size, dec) * u.deg, frame=j2000)
    tip = star.transform_to(of_date).directional_offset_by(theta * u.deg, 1 * u.arcsec)
    tip = SkyCoord(tip.ra, tip.dec, frame=of_date).transform_to(j2000)
    return star.position_angle(tip).deg


def test_precession_agrees_with_astropy_fk5_everywhere():
    # Random pairs over the whole sky (up to half a degree from a pole) and epochs
    # 1800-2100: the same position angle as astropy's FK5 equinox change, both ways.
    rng = np.random.default_rng(11)
    for _ in range(12):
        ra, dec = rng.uniform(0, 360), rng.uniform(-89.5, 89.5)
        t, theta = rng.uniform(1800, 2100, 40), rng.uniform(0, 360, 40)
        ours = precess_theta_to_j2000(theta, t, ra, dec)
        diff = (ours - _astropy_precessed(theta, t, ra, dec) + 180.0) % 360.0 - 180.0
        assert np.max(np.abs(diff)) < 2e-7
        back = precess_theta_to_date(ours, t, ra, dec)
        assert np.max(np.abs((back - theta + 180.0) % 360.0 - 180.0)) < 1e-9


@pytest.mark.parametrize("text, unit", [
    ("14h27m13.4s", "hourangle"), ("06:45:08.9", "hourangle"), ("6h45.2m", "hourangle"),
    ("23 59 59.99", "hourangle"), ("12h", "hourangle"), ("0:0:0.5", "hourangle"),
    ("+38d41m06s", "deg"), ("-16:42:58", "deg"), ("-00:30:00", "deg"), ("+38 41 06", "deg"),
    ("-16d42m58.5s", "deg"), ("89d59m59.9s", "deg"), ("-0d0m1s", "deg")])
def test_sexagesimal_coordinates_read_as_astropy_reads_them(text, unit):
    # astropy.coordinates.Angle is the reference reader of the same text
    from astropy.coordinates import Angle

    ours = parse_right_ascension(text) if unit == "hourangle" else parse_declination(text)
    assert ours == pytest.approx(Angle(text, unit=unit).deg, abs=1e-12)


@pytest.mark.parametrize("text", ["10:60:00", "1.5:30", "12h30d", "12x30m", "--1:00", "1:2:3:4",
                                  ""])
def test_malformed_sexagesimal_is_refused(text):
    with pytest.raises(InputError, match="neither degrees nor sexagesimal"):
        parse_declination(text)


def test_besselian_years_convert_as_astropy_converts_them():
    # The closed form (Lieske 1979) against astropy's 'byear' format in TT, both ways,
    # over the span of visual double-star logs; and a round trip.
    from astropy.time import Time
    b = np.linspace(1750.0, 2100.0, 2001)
    j = to_julian_year(b, "besselian")
    np.testing.assert_allclose(j, Time(b, format="byear", scale="tt").jyear, rtol=0, atol=1e-9)
    np.testing.assert_allclose(from_julian_year(j, "besselian"), b, rtol=0, atol=1e-10)
    np.testing.assert_allclose(from_julian_year(j, "besselian"),
                               Time(j, format="jyear", scale="tt").byear, rtol=0, atol=1e-9)
