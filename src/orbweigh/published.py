"""Published elements as input: ``--elements "P=41.623±0.05 T=1934.008 ..."`` or a TOML file.

Both become an ordinary result document (``elements`` block with value, error, unit and
T's scale) validated by ``result.py``, so every command reads them like a fit's output.

TOML file (each element a number or a table; T may be written in any epoch form a log
accepts, as a string)::

    name = "eta CrB"
    reference = "the paper the orbit came from"
    ra = "15h23m12.3s"          # optional J2000 coordinates, for --equinox date
    dec = "+30d17m16s"
    parallax = {value = 55.9, error = 0.8}   # mas, optional
    P = {value = 41.623, error = 0.05, unit = "yr"}
    T = {value = "1934.008", error = 0.1}   # or T = 1934.008 (Besselian), scale = "julian"
    e = 0.2763
    ...
"""
from __future__ import annotations

import re

from .elements import ELEMENT_KEYS, ELEMENT_UNITS
from .errors import InputError
from .reductions import epoch_unit, split_epoch

__all__ = ["parse_elements_option", "read_elements_file", "document_from_values",
           "INDEPENDENT_ERRORS_NOTE"]

INDEPENDENT_ERRORS_NOTE = ("the elements have errors but no covariance: bands come from "
                           "independent draws of each element, their correlations are unknown")

_ITEM = re.compile(r"^\s*(?P<key>[A-Za-z]+)\s*=\s*(?P<value>[^±]+?)\s*"
                   r"(?:(?:±|\+-|\+/-)\s*(?P<error>\S+))?\s*$")
_ALIASES = {"W": "Omega", "Node": "Omega", "w": "omega"}


def _number(text, where, what):
    try:
        value = float(text)
    except (TypeError, ValueError):
        value = float("nan")
    if value != value or value in (float("inf"), float("-inf")):
        raise InputError(f"{where}: {what} {text!r} is not a finite number")
    return value


def document_from_values(values, where, extra=None):
    """A result document from {key: (value text or number, error or None, scale or None)}.

    T's value is read like a log epoch (plain decimal = Besselian year, J…, JD…, MJD…, ISO);
    its error is in the unit of that scale (yr, or d for JD/MJD). The document is validated
    by ``result.validate_document`` (the one check of a document).
    """
    from .result import validate_document

    missing = [k for k in ELEMENT_KEYS if k not in values]
    if missing:
        raise InputError(f"{where}: element(s) {', '.join(missing)} missing; give all of "
                         f"{', '.join(ELEMENT_KEYS)}, e.g. P=41.623 T=1934.008 e=0.2763 a=0.907 "
                         "i=59.025 Omega=23.717 omega=219.907")
    elements = {}
    for key in ELEMENT_KEYS:
        value, error, scale = values[key]
        entry = {"unit": ELEMENT_UNITS[key]}
        if key == "T":
            try:
                number, written = split_epoch(str(value))
            except ValueError as exc:
                raise InputError(f"{where}: element T: {exc}") from None
            if scale is not None and written == "besselian":
                written = scale      # a plain number in the scale the file states
            entry.update(value=number, scale=written, unit=epoch_unit(written))
        else:
            entry["value"] = _number(value, where, f"element {key}")
        if error is not None:
            entry["error"] = _number(error, where, f"error of {key}")
            if entry["error"] < 0:
                raise InputError(f"{where}: the error of {key} is negative ({error})")
        elements[key] = entry
    doc = {"schema": "orbweigh.result/1", "source": where, "elements": elements,
           **(extra or {})}
    return validate_document(doc, where)


def parse_elements_option(text, where="--elements"):
    """Document from 'P=41.623±0.05 T=1934.008 e=0.2763 …' (errors with ± or +-)."""
    values = {}
    for item in text.replace(",", " ").split():
        m = _ITEM.match(item.replace("+/-", "±").replace("+-", "±"))
        if m is None:
            raise InputError(f"{where}: cannot read {item!r}; write KEY=VALUE or "
                             "KEY=VALUE±ERROR (or +-), e.g. P=41.623±0.05")
        key = _ALIASES.get(m["key"], m["key"])
        if key not in ELEMENT_KEYS:
            raise InputError(f"{where}: unknown element {m['key']!r}; the elements are "
                             f"{', '.join(ELEMENT_KEYS)}")
        if key in values:
            raise InputError(f"{where}: element {key} is given twice")
        values[key] = (m["value"], m["error"], None)
    return document_from_values(values, where)


def read_elements_file(path):
    """Document from a TOML elements file (see the module notes)."""
    import tomllib

    where = str(path)
    try:
        with open(path, "rb") as fh:
            data = tomllib.load(fh)
    except OSError as exc:
        raise InputError(f"{where}: cannot read the file ({exc.strerror})") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{where}: not valid TOML ({exc}); write e.g. P = 41.623 or "
                         "P = {value = 41.623, error = 0.05}") from None
    values, extra = {}, {}
    for key, item in data.items():
        name = _ALIASES.get(key, key)
        if name in ELEMENT_KEYS:
            if isinstance(item, dict):
                unknown = set(item) - {"value", "error", "unit", "scale"}
                if unknown or "value" not in item:
                    raise InputError(f"{where}: element {key} must be a number or a table "
                                     "{value = …, error = …, unit = …}; got keys "
                                     f"{', '.join(sorted(item))}")
                unit = item.get("unit")
                if unit is not None and name != "T" and unit != ELEMENT_UNITS[name]:
                    raise InputError(f"{where}: element {key} has unit {unit!r}; expected "
                                     f"{ELEMENT_UNITS[name]!r}")
                values[name] = (item["value"], item.get("error"), item.get("scale"))
            else:
                values[name] = (item, None, None)
        elif key in ("name", "reference"):
            extra[key] = str(item)
        elif key in ("ra", "dec"):
            extra.setdefault("target", {})[f"{key}_text"] = str(item)
        elif key == "parallax":
            p = item if isinstance(item, dict) else {"value": item}
            extra["parallax_input"] = {"value": _number(p.get("value"), where, "parallax"),
                                       "error": (None if p.get("error") is None else
                                                 _number(p["error"], where, "parallax error")),
                                       "unit": "mas"}
        else:
            raise InputError(f"{where}: unknown key {key!r}; expected the elements "
                             f"{', '.join(ELEMENT_KEYS)} and optionally name, reference, "
                             "ra, dec, parallax")
    if "target" in extra:
        from .reductions import parse_target_coordinates
        t = extra["target"]
        if set(t) != {"ra_text", "dec_text"}:
            raise InputError(f"{where}: give both ra and dec, or neither")
        t["ra_deg"], t["dec_deg"] = parse_target_coordinates(t["ra_text"], t["dec_text"])
    return document_from_values(values, where, extra)
