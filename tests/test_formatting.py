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
