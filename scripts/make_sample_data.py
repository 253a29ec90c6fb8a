"""Regenerate the invented sample pair in ``sample_measurements/``.

The pair, Sparrowmere 47 AB, and its home, the Sparrowmere Hill Observatory, are invented:
no real star or site is meant. The true elements below produce a measurement history
1880-2025 (micrometer, photographic, speckle, adaptive optics, space astrometry) and a
radial-velocity log of both components around the 2009 periastron, with noise from one
seeded generator, so the files are rebuilt byte for byte:

    python scripts/make_sample_data.py            # write the files
    python scripts/make_sample_data.py --check    # exit 1 if the committed files differ

Position angles are written for the equinox of the date of observation (the custom of
measurement logs; space astrometry excepted, which is in the ICRS); reduce them to J2000
with the target coordinates TARGET_RA/TARGET_DEC.
"""
from __future__ import annotations

import argparse
import csv
import io
import sys
from pathlib import Path

import numpy as np

from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris
from orbweigh.reductions import from_julian_year, to_julian_year
from orbweigh.spectroscopic import (component_masses_from_orbit, radial_velocities,
                                    rv_semi_amplitude_kms)

SEED = 47047
OUT_DIR = Path(__file__).resolve().parent.parent / "sample_measurements"

# True orbit (astrometric convention: secondary relative to primary; Omega is the
# ascending node, where the secondary recedes). P in Julian years, T a decimal Julian year.
TRUE = CampbellElements(period_yr=68.40, periastron_yr=2009.350, e=0.530, a_arcsec=0.8600,
                        i_deg=57.00, node_deg=236.40, omega_deg=131.70)
PARALLAX_MAS = 41.30          # true parallax
PARALLAX_SIGMA_MAS = 0.40     # error of the published trigonometric parallax
MASS_RATIO = 0.78             # q = M2/M1 = K1/K2
GAMMA_KMS = -14.60
TARGET_RA, TARGET_DEC = "14h27m13.4s", "+38d41m06s"   # invented, ICRS/J2000

# (technique, first year, last year, number of epochs, smallest resolvable rho [arcsec])
SCHEDULE = (
    ("micrometer", 1880.0, 1900.0, 5, 0.30),     # a few early measurements
    ("micrometer", 1900.0, 1962.0, 32, 0.30),
    ("photographic", 1912.0, 1975.0, 16, 0.50),
    ("speckle", 1976.0, 2012.0, 30, 0.04),
    ("adaptive_optics", 2005.0, 2025.5, 16, 0.05),
)
SPACE_EPOCHS = (1991.31, 2016.02)
# noise used where the observer gave no sigma (the log leaves those cells empty)
UNSTATED_SIGMA = {"micrometer": (1.5, 0.10), "photographic": (0.5, 0.025)}
N_RV_EPOCHS = 26
RV_BLEND_KMS = 3.0            # lines closer than this are blended: secondary not measured


def true_masses():
    """(a_au, M1, M2, K1, K2) implied by the true elements, parallax and q."""
    a_au = TRUE.a_arcsec / (PARALLAX_MAS / 1e3)
    k_total = float(rv_semi_amplitude_kms(a_au, TRUE.period_yr, TRUE.e, TRUE.i_deg))
    k1 = k_total * MASS_RATIO / (1.0 + MASS_RATIO)
    m1, m2 = component_masses_from_orbit(a_au, TRUE.period_yr, k1, k_total - k1)
    return a_au, float(m1), float(m2), k1, k_total - k1


def pa_rotation_to_date(jyear):
    """theta(equinox of date) - theta(J2000) [deg] at the target, by rigorous precession."""
    import astropy.units as u
    from astropy.coordinates import FK5, SkyCoord
    from astropy.time import Time
    star = SkyCoord(TARGET_RA, TARGET_DEC, frame=FK5(equinox="J2000"))
    pole = SkyCoord(0 * u.deg, 90 * u.deg, frame=FK5(equinox="J2000"))
    date = FK5(equinox=Time(jyear, format="jyear", scale="tt"))
    # position angle, in the frame of date, of the direction to the J2000 pole
    return star.transform_to(date).position_angle(pole.transform_to(date)).wrap_at(
        180 * u.deg).deg


def stated_sigmas(rng, technique, rho):
    """(sigma_theta [deg], sigma_rho [arcsec]) an observer of ``technique`` would quote."""
    if technique == "micrometer":
        return round(rng.uniform(1.0, 2.0), 1), round(rng.uniform(0.05, 0.15), 2)
    if technique == "photographic":
        s_rho = round(rng.uniform(0.015, 0.030), 3)
        return round(np.degrees(s_rho / rho), 2), s_rho
    if technique == "speckle":
        return round(rng.uniform(0.5, 1.0), 2), round(rng.uniform(0.002, 0.006), 3)
    if technique == "adaptive_optics":
        s_rho = round(rng.uniform(0.001, 0.003), 4)
        return round(np.degrees(s_rho / rho), 2), s_rho
    s_rho = 0.0005                                             # space astrometry
    return round(np.degrees(s_rho / rho), 3), s_rho


# decimals written: epoch, theta, rho, sigma_theta, sigma_rho
DECIMALS = {"micrometer": (3, 1, 2, 1, 2), "photographic": (3, 1, 3, 2, 3),
            "speckle": (4, 2, 3, 2, 3), "adaptive_optics": (4, 2, 4, 2, 4),
            "space": (4, 3, 4, 3, 4)}


def draw_epochs(rng):
    """(technique, Besselian epoch) pairs of resolved observations, in time order."""
    rows = []
    for technique, start, stop, n, rho_min in SCHEDULE:
        dec = DECIMALS[technique][0]
        byears = np.round(np.sort(rng.uniform(start, stop, n)), dec)
        rho = ephemeris(TRUE, to_julian_year(byears, "besselian")).rho_arcsec
        rows += [(technique, float(b)) for b, r in zip(byears, rho) if r >= rho_min]
    rows += [("space", round(float(from_julian_year(t, "besselian")), 4)) for t in SPACE_EPOCHS]
    return sorted(rows, key=lambda row: row[1])


def make_measurements(rng):
    """Rows of measurements.csv and a list of what was planted (1-based file lines)."""
    rows = []
    for technique, byear in draw_epochs(rng):
        jyear = float(to_julian_year(byear, "besselian"))
        eph = ephemeris(TRUE, jyear)
        # space astrometry gives position angles in the ICRS, aligned with J2000
        theta = float(eph.theta_deg[0]) + (0.0 if technique == "space"
                                           else pa_rotation_to_date(jyear))
        rho = float(eph.rho_arcsec[0])
        s_theta, s_rho = stated_sigmas(rng, technique, rho)
        rows.append(dict(technique=technique, byear=byear, theta=theta, rho=rho,
                         s_theta=s_theta, s_rho=s_rho, noise=rng.standard_normal(2),
                         flag="", note=""))
    planted = plant_defects(rows)
    for row in rows:
        s_theta, s_rho = row["s_theta"], row["s_rho"]
        if s_theta is None:
            s_theta, s_rho = UNSTATED_SIGMA[row["technique"]]
        row["theta"] = np.mod(row["theta"] + s_theta * row["noise"][0] + row.pop("shift", 0.0),
                              360.0)
        row["rho"] = row["rho"] + s_rho * row["noise"][1] + row.pop("rho_shift", 0.0)
    return rows, planted


def plant_defects(rows):
    """Mark the planted problems on ``rows`` (in place); return their description."""
    by_tech = {t: [k for k, r in enumerate(rows) if r["technique"] == t]
               for t in ("micrometer", "photographic", "speckle")}
    planted = []
    for k in by_tech["micrometer"][:4] + by_tech["photographic"][:1]:
        rows[k]["s_theta"] = rows[k]["s_rho"] = None
        planted.append((k, "no sigma given (technique default applies)"))
    k = by_tech["micrometer"][12]
    rows[k]["shift"] = 10.0 * rows[k]["s_theta"]
    planted.append((k, "gross outlier: theta off by +10 sigma "
                       f"(+{rows[k]['shift']:.0f} deg)"))
    for k in (by_tech["speckle"][7], by_tech["speckle"][19]):
        rows[k]["shift"] = 180.0
        planted.append((k, "quadrant flip: theta off by 180 deg"))
    k = by_tech["micrometer"][24]
    rows[k]["rho_shift"] = 6.0 * rows[k]["s_rho"]
    rows[k]["flag"] = "x"
    rows[k]["note"] = "observer: image very unsteady; distance a rough estimate only"
    planted.append((k, "flagged by the observer (rho shifted by +6 sigma)"))
    return sorted((k + 2, what) for k, what in planted)      # header is line 1


def measurement_lines(rows):
    """CSV text of the measurement log."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(["epoch", "theta", "rho", "sigma_theta", "sigma_rho", "technique",
                     "flag", "note"])
    for r in rows:
        d_ep, d_th, d_rho, d_sth, d_srho = DECIMALS[r["technique"]]
        sig = ("", "") if r["s_theta"] is None else (f"{r['s_theta']:.{d_sth}f}",
                                                     f"{r['s_rho']:.{d_srho}f}")
        theta = f"{r['theta']:.{d_th}f}"
        if float(theta) >= 360.0:               # rounding may reach 360.0: wrap to 0
            theta = f"{0.0:.{d_th}f}"
        writer.writerow([f"{r['byear']:.{d_ep}f}", theta, f"{r['rho']:.{d_rho}f}", *sig,
                         r["technique"], r["flag"], r["note"]])
    return out.getvalue()


def velocity_lines(rng, k1, k2):
    """CSV text of the radial-velocity log and the 1-based line of the flagged row."""
    jd0, jd1 = 2450100.0, 2460700.0                   # 1996.0 .. 2025.1
    t_peri_jd = float(from_julian_year(TRUE.periastron_yr, "jd"))
    jd = np.concatenate([rng.uniform(jd0, jd1, N_RV_EPOCHS // 2),
                         t_peri_jd + rng.uniform(-3.0, 3.0, N_RV_EPOCHS - N_RV_EPOCHS // 2)
                         * 365.25])
    jd = np.round(np.sort(jd), 4)
    v1, v2 = radial_velocities(to_julian_year(jd, "jd"), TRUE.period_yr, TRUE.periastron_yr,
                               TRUE.e, TRUE.omega_deg, k1, k2, GAMMA_KMS)
    rows = []
    for t, a, b in zip(jd, v1, v2):
        s1, s2 = round(rng.uniform(0.3, 0.5), 2), round(rng.uniform(0.6, 1.0), 2)
        n1, n2 = rng.standard_normal(2)
        rows.append([f"{t:.4f}", "1", a + s1 * n1, s1, "", ""])
        if abs(a - b) >= RV_BLEND_KMS:
            rows.append([f"{t:.4f}", "2", b + s2 * n2, s2, "", ""])
        else:
            rows[-1][5] = "lines blended; secondary not measured"
    flagged = len(rows) // 3
    rows[flagged][2] += 3.0 * rows[flagged][3]
    rows[flagged][4] = "x"
    rows[flagged][5] = "thin cloud; low signal-to-noise spectrum"
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(["epoch", "component", "rv", "sigma_rv", "flag", "note"])
    for t, comp, rv, s, flag, note in rows:
        writer.writerow([t, comp, f"{rv:.2f}", f"{s:.2f}", flag, note])
    return out.getvalue(), flagged + 2


def build():
    """{file name: text} of the generated files, plus the planted list for the README."""
    rng = np.random.default_rng(SEED)
    rows, planted = make_measurements(rng)
    _, _, _, k1, k2 = true_masses()
    rv_text, rv_flagged = velocity_lines(rng, k1, k2)
    parallax_published = round(PARALLAX_MAS + PARALLAX_SIGMA_MAS * rng.standard_normal(), 2)
    return ({"measurements.csv": measurement_lines(rows), "velocities.csv": rv_text},
            planted, rv_flagged, parallax_published)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--check", action="store_true",
                        help="compare with the files on disk instead of writing them")
    args = parser.parse_args(argv)
    files, planted, rv_flagged, parallax = build()
    if args.check:
        stale = [n for n, text in files.items()
                 if not (OUT_DIR / n).exists() or (OUT_DIR / n).read_text() != text]
        print("stale: " + ", ".join(stale) if stale else "sample data up to date")
        return 1 if stale else 0
    OUT_DIR.mkdir(exist_ok=True)
    for name, text in files.items():
        (OUT_DIR / name).write_text(text)
    a_au, m1, m2, k1, k2 = true_masses()
    print(f"seed {SEED}; a = {a_au:.4f} au, M1 = {m1:.4f}, M2 = {m2:.4f} M_sun, "
          f"K1 = {k1:.4f}, K2 = {k2:.4f} km/s; published parallax {parallax:.2f} "
          f"+- {PARALLAX_SIGMA_MAS:.2f} mas")
    for line, what in planted:
        print(f"measurements.csv line {line}: {what}")
    print(f"velocities.csv line {rv_flagged}: flagged by the observer (rv off by +3 sigma)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
