"""The ECSV writer against astropy's ECSV reader (the reference implementation of the
format, astropy.io.ascii.ecsv)."""
import math

import numpy as np
from astropy.table import Table

from orbweigh.ecsv import ecsv_text

TRICKY_META = {
    "description": "draws: 'quoted', \"double\", colon: yes, # hash, newline\nand σ ±",
    "seed": 12345678901234, "tiny": 1e-05, "huge": 1e20, "negative": -2.5e-300,
    "whole": 3.0, "plain": 0.1, "nan": math.nan, "inf": math.inf, "minus_inf": -math.inf,
    "flag": True, "off": False, "missing": None, "empty": {}, "nothing": [],
    "nested": {"T": {"mean": 2015.25, "sigma": 0.5}, "list": [1, 2.0, "three", None]},
    "yes": "yes", "number_like": "1e-05", "np": np.float64(0.25), "npint": np.int64(7),
}


def _read(text):
    return Table.read(text.splitlines(), format="ascii.ecsv")


def test_columns_units_and_values_round_trip_exactly():
    rng = np.random.default_rng(3)
    columns = [rng.standard_normal(200) * 10.0 ** rng.integers(-300, 300, 200),
               rng.uniform(1800, 2100, 200), np.zeros(200)]
    table = _read(ecsv_text(columns, ["a", "T", "e"], ["arcsec", "yr", None], {}))
    assert table.colnames == ["a", "T", "e"]
    assert str(table["a"].unit) == "arcsec" and str(table["T"].unit) == "yr"
    assert table["e"].unit is None
    for name, column in zip(["a", "T", "e"], columns):
        assert np.array_equal(np.asarray(table[name], float), column)   # bit for bit


def test_metadata_is_typed_back_as_given():
    meta = dict(_read(ecsv_text([[1.0]], ["x"], [None], TRICKY_META)).meta)
    for key, given in TRICKY_META.items():
        got = meta[key]
        if isinstance(given, float) and math.isnan(given):
            assert math.isnan(got)
            continue
        assert got == given and type(got) is type(given.item() if isinstance(
            given, np.generic) else given), key
