"""The one number and epoch formatter: the rounding rule in each of its forms."""
import pytest

from orbweigh import formatting as fmt


# Two significant digits of the uncertainty, value to the same place, never beyond units
# (common practice, no source).
@pytest.mark.parametrize("value, error, text", [
    (1.93, 0.0281, "1.930 ± 0.028 arcsec"), (2.25, 0.092, "2.250 ± 0.092 arcsec"),
    (38.04, 0.02235, "38.040 ± 0.022 arcsec"), (12345.6, 123.0, "12346 ± 123 arcsec"),
    (0.5, None, "0.5 arcsec"),
])
def test_value_error_text(value, error, text):
    assert fmt.value_error(value, error, "arcsec") == text


def test_value_error_latex_uses_pm():
    assert fmt.value_error(38.04, 0.02235, latex=True) == r"$38.040 \pm 0.022$"


def test_interval_rounded_at_narrower_half():
    # [1.04, 1.131] around 1.08: narrower half 0.04 -> 2 decimals (common practice).
    assert fmt.interval_parts(1.08, 1.04, 1.131) == ("1.080", "1.040", "1.131")
    assert fmt.interval(2.05, 1.94, 2.163, "M_sun") == "2.05 +0.11 \u22120.11 M_sun"
    assert fmt.interval(2.05, 1.961, 2.163, latex=True) == "$2.050^{+0.113}_{-0.089}$"
    assert fmt.interval(2.05, 1.94, None, latex=True) == r"$2.05^{+\infty}_{-0.11}$"


def test_percent_and_fixed():
    assert fmt.percent(0.997544) == "99.8 %"
    assert fmt.fixed(2.0, 3) == "2.000" and fmt.fixed(None, 2) == ""


def test_epoch_in_the_logs_scale_with_its_label():
    assert fmt.epoch(2009.3712, "besselian") == "2009.371 (Besselian year)"
    assert fmt.epoch(2009.37, "julian", error=0.0153) == "2009.370 ± 0.015 (Julian year)"
    assert fmt.epoch(2455000.31, "jd") == "JD 2455000.3"
    # B2012.0 is J2011.9986 or so: the Besselian year is 365.2422 days and B1900.0 is
    # JD 2415020.3135 (Lieske 1979, A&A 73, 282), so shown back in the log's scale it is
    # 2012.000 again, not the internal 2011.998.
    assert fmt.epoch(fmt.epoch_in_scale(2011.99863, "besselian"), "besselian",
                     label=False) == "2012.000"


def test_p_value_two_digits_and_never_zero():
    """A chi2 of 2000 for 20 dof: scipy's tail underflows to exactly 0, while the exact
    tail (mpmath's regularised upper incomplete gamma, Q(10, 1000)) is about 1e-400; the
    text is the bound, never 'p = 0'."""
    import mpmath
    from scipy.stats import chi2
    assert chi2.sf(2000.0, 20) == 0.0
    exact = mpmath.gammainc(10, 1000, mpmath.inf, regularized=True)
    assert 0 < exact < fmt.P_FLOOR
    assert fmt.p_value(chi2.sf(2000.0, 20)) == "< 1e-300"
    assert fmt.p_value(0.0, "p") == "p < 1e-300"
    # chi2 of 40 for 20 dof: Q(10, 20) = 0.004995 (mpmath; A&S 1964 eq. 26.4.21 by hand
    # gives the same sum), two significant digits.
    assert float(mpmath.gammainc(10, 20, mpmath.inf, regularized=True)) == \
        pytest.approx(chi2.sf(40.0, 20), rel=1e-12)
    assert fmt.p_value(chi2.sf(40.0, 20), "p") == "p = 0.005"
    assert fmt.p_value(0.028) == "0.028" and fmt.p_value(1.0) == "1"


def test_p_value_floor_is_a_true_bound_where_scipy_underflows():
    """Wherever the chi2 tail (scipy.special.gammaincc, as the revision test computes it)
    first reads 0, the exact tail from mpmath is already below the floor, for few and many
    degrees of freedom."""
    import mpmath
    from scipy.special import gammaincc
    for dof in (2, 20, 2000):
        lo, hi = 1.0, 1e5
        for _ in range(80):                 # bisect for the first chi2 whose tail reads 0
            mid = 0.5 * (lo + hi)
            lo, hi = (lo, mid) if gammaincc(dof / 2, mid / 2) == 0 else (mid, hi)
        assert gammaincc(dof / 2, hi / 2) == 0.0
        assert mpmath.gammainc(dof / 2, hi / 2, mpmath.inf, regularized=True) < fmt.P_FLOOR


def test_counts_and_line_lists_agree_in_number():
    # English agreement (common practice, no source): one line, two lines.
    assert fmt.counted(1, "measurement") == "1 measurement"
    assert fmt.counted(0, "system") == "0 systems"
    assert fmt.counted(2, "radial velocity", "radial velocities") == "2 radial velocities"
    assert fmt.line_list([7]) == "line 7"
    assert fmt.line_list([2, 3, 9]) == "lines 2, 3, 9"
    assert fmt.line_list(range(1, 15), most=3) == "lines 1, 2, 3 ..."
