"""ECSV 1.0 text of float columns, written without astropy.table.

astropy.table with its YAML support takes about 0.2 s to import, a tenth of a sampled fit
from the command line, only to write the posterior draws. The draws are plain float
columns with a metadata mapping, which this writes directly: the header in YAML flow
style (each value as the YAML 1.1 resolver of astropy's reader types it back), the data
space-separated with every float written to round-trip exactly. Files are read back with
astropy (``result.read_draws``); tests/test_ecsv.py checks the round trip there.
"""
from __future__ import annotations

import json
import math

import numpy as np

__all__ = ["ecsv_text"]


def ecsv_text(columns, names, units, meta):
    """ECSV 1.0 text of equal-length float ``columns`` named ``names``.

    ``units`` holds a unit string or None per column; ``meta`` is a mapping of plain
    values (str, int, float, bool, None, lists and mappings of them).
    """
    lines = ["# %ECSV 1.0", "# ---", "# datatype:"]
    for name, unit in zip(names, units):
        entry = {"name": name, **({"unit": unit} if unit else {}), "datatype": "float64"}
        lines.append("# - " + _flow(entry))
    if meta:
        lines.append("# meta: " + _flow(meta))
    lines.append("# schema: astropy-2.0")
    lines.append(" ".join(names))
    rows = np.column_stack([np.asarray(c, float) for c in columns]).tolist()
    lines.extend(" ".join(map(repr, row)) for row in rows)
    return "\n".join(lines) + "\n"


def _flow(value):
    """``value`` in YAML flow style, typed back as given by a YAML 1.1 reader."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, dict):
        return "{" + ", ".join(f"{json.dumps(str(k))}: {_flow(v)}"
                               for k, v in value.items()) + "}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_flow(v) for v in value) + "]"
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return _float(value)
    return json.dumps(str(value), ensure_ascii=False)


def _float(x):
    """A float as YAML 1.1 reads a float: a dot always, a signed exponent (repr has it)."""
    if math.isnan(x):
        return ".nan"
    if math.isinf(x):
        return ".inf" if x > 0 else "-.inf"
    text = repr(x)
    if "." not in text:
        mantissa, _, exponent = text.partition("e")
        text = mantissa + ".0" + (f"e{exponent}" if exponent else "")
    return text
