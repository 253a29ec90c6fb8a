"""The result document (schema ``orbweigh.result/1``): loading and reading it back.

The document is the interchange between commands (``fit`` writes it; ``ephemeris``,
``mass``, ``report``, ``plan`` and ``batch`` read it). Later features add keys, none
change. Keys read here:

* ``elements``: {key: {"value", "error", "unit"}} for P, T, e, a, i, Omega, omega;
  ``T`` also carries ``"scale"`` (see ``reductions``), default 'besselian'.
* ``covariance`` (optional): {"parameters": [...7 keys...], "matrix": 7x7} in internal
  units: P [yr], T [Julian yr], e, a [arcsec], i, Omega, omega [deg].
* ``posterior`` (optional): {"draws_file": path relative to the document, ...}; the draws
  file is an ECSV table with columns P, T (Julian yr), e, a, i, Omega, omega.
* ``warnings`` (optional): a list of strings; ``seed`` (optional): an integer.
* ``statistics.techniques`` and ``statistics.technique_scales`` (optional): residuals and
  sigma factors by technique (docs/result-document.md).

``validate_document`` is the one check of a document at the boundary: every reader
(``load_result``, batch, published-elements inputs) goes through it, so commands work on
a document whose types and ranges are known. Physical ranges checked: P > 0 and a > 0
finite, 0 <= e < 1, 0 <= i <= 180 deg, -360 <= Omega, omega <= 360 deg, T finite, errors
finite and >= 0 (or absent). The other blocks a command reads (``mass``, ``parallax``,
``thiele_innes``, the posterior's summary and run, ``residuals``, ``statistics``,
``options``, ``precession``, ...) are checked for their types and required keys
(``_SHAPES``); elements written as bare numbers are read as ``{"value": number}``.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from .constants import JULIAN_YEAR_D
from .elements import ELEMENT_KEYS, CampbellElements
from .errors import InputError
from .reductions import EPOCH_SCALES, epoch_unit, to_julian_year

__all__ = ["SCHEMA", "MAX_DOCUMENT_BYTES", "load_result", "validate_document",
           "elements_from_document", "element_draws", "epoch_scale_of", "read_draws",
           "draws_for_masses", "covariance_from_document", "element_errors", "independent_draws",
           "t_is_node_passage"]

SCHEMA = "orbweigh.result/1"


MAX_DOCUMENT_BYTES = 64 * 2 ** 20   # a result document is a few kB; refuse a runaway file

#: Inclusive ranges of the element values (None: unbounded); P, a strictly positive.
_RANGES = {"P": (0.0, None), "T": (None, None), "e": (0.0, 1.0), "a": (0.0, None),
           "i": (0.0, 180.0), "Omega": (-360.0, 360.0), "omega": (-360.0, 360.0)}
_STRICT = {"P": "> 0", "a": "> 0", "e": "< 1"}


def load_result(path, needs=("elements",)):
    """Read a result (or bare elements) JSON document and validate it (``validate_document``).

    A file holding only the elements block (``{"P": {...}, "T": ..., ...}``) is accepted
    and wrapped as ``{"elements": ...}``.
    """
    path = Path(path)
    from .tables import read_bounded_bytes
    data = read_bounded_bytes(path, MAX_DOCUMENT_BYTES, what="result document")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not a UTF-8 text file (byte {exc.start} cannot be decoded); "
                         "a result document is the JSON written by 'orbweigh fit --json'") from None
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"{path}, line {exc.lineno}: not valid JSON ({exc.msg})") from None
    except RecursionError:
        raise InputError(f"{path}: the JSON is nested too deeply to be a result document") from None
    if isinstance(doc, dict) and "elements" not in doc and set(ELEMENT_KEYS) <= set(doc):
        doc = {"elements": doc}
    return validate_document(doc, path, needs=needs)


def _fail(source, key, what):
    raise InputError(f"{source}: '{key}' {what}")


def _check_number(source, key, value, low=None, high=None, strict=None):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        _fail(source, key, f"must be a number, not {type(value).__name__} {value!r:.40}")
    value = float(value)
    if not np.isfinite(value):
        _fail(source, key, f"must be finite, not {value}")
    bad_low = low is not None and (value <= low if strict and ">" in strict else value < low)
    bad_high = high is not None and (value >= high if strict and "<" in strict else value > high)
    if bad_low or bad_high:
        rng = strict or f"in [{low}, {high}]"
        if strict and low is not None and high is not None:
            rng = f"in [{low}, {high})"
        _fail(source, key, f"is {value:g}, outside its range ({rng})")
    return value


def _check_elements(source, block, name="elements"):
    if not isinstance(block, dict):
        _fail(source, name, "must be an object {P, T, e, a, i, Omega, omega}, as written by "
              "'orbweigh fit --json'")
    for key in ELEMENT_KEYS:
        where = f"{name}.{key}"
        if key not in block:
            _fail(source, where, f"is missing; the elements block needs {', '.join(ELEMENT_KEYS)}")
        entry = block[key]
        value = entry.get("value") if isinstance(entry, dict) else entry
        if isinstance(entry, dict):
            _check_shape(source, f"{where}.unit", entry.get("unit"), "string")
        low, high = _RANGES[key]
        _check_number(source, f"{where}.value" if isinstance(entry, dict) else where,
                      value, low, high, _STRICT.get(key))
        if isinstance(entry, dict):
            for bound in ("error", "low", "high"):
                if entry.get(bound) is not None:
                    _check_number(source, f"{where}.{bound}", entry[bound],
                                  0.0 if bound == "error" else None)
        else:   # a bare number: the form every reader expects
            block[key] = {"value": entry}


def validate_document(doc, source, needs=("elements",)):
    """Check a result document once, where it is read; return it with ``_path`` set.

    Parameters
    ----------
    doc : object
        The parsed JSON.
    source : str or Path
        The file it came from (named in every message).
    needs : tuple of str
        Blocks the caller uses and that must therefore be present: any of "elements",
        "covariance", "draws" (a readable posterior draws file), "mass". Optional blocks
        that are present are checked whatever ``needs`` says.

    Raises
    ------
    InputError
        Naming the file and the key at fault.
    """
    source = str(source)
    if not isinstance(doc, dict):
        raise InputError(f"{source}: expected a JSON object with an 'elements' block "
                         "(P, T, e, a, i, Omega, omega), as written by 'orbweigh fit --json'")
    for block in needs:
        present = (doc.get("posterior") or {}).get("draws_file") if block == "draws" \
            else doc.get(block)
        if block == "draws" and not isinstance(doc.get("posterior"), dict):
            present = None
        if not present:
            _fail(source, "posterior.draws_file" if block == "draws" else block,
                  "is missing; this command needs it (write it with 'orbweigh fit')")
    _check_elements(source, doc.get("elements"))
    doc["_path"] = source
    epoch_scale_of(doc)
    if "warnings" in doc and not (isinstance(doc["warnings"], list)
                                  and all(isinstance(w, str) for w in doc["warnings"])):
        _fail(source, "warnings", "must be a list of strings")
    if doc.get("seed") is not None and (isinstance(doc["seed"], bool)
                                        or not isinstance(doc["seed"], int)):
        _fail(source, "seed", f"must be an integer, not {doc['seed']!r:.40}")
    for block in ("mass", "parallax", "statistics", "options"):
        if doc.get(block) is not None and not isinstance(doc[block], dict):
            _fail(source, block, "must be an object")
    _check_techniques(source, doc.get("statistics") or {})
    if doc.get("alternatives") is not None:
        if not isinstance(doc["alternatives"], list):
            _fail(source, "alternatives", "must be a list")
        for j, alt in enumerate(doc["alternatives"]):
            _check_elements(source, alt.get("elements") if isinstance(alt, dict) else alt,
                            f"alternatives[{j}].elements")
    if doc.get("residuals") is not None and not (
            isinstance(doc["residuals"], list)
            and all(isinstance(r, dict) for r in doc["residuals"])):
        _fail(source, "residuals", "must be a list of objects")
    covariance_from_document(doc)
    for block, shape in _SHAPES.items():
        if doc.get(block) is not None:
            _check_shape(source, block, doc[block], shape)
    for block, groups in _TOGETHER.items():
        for keys in groups:
            given = [k for k in keys if k in (doc.get(block) or {})]
            if given and len(given) < len(keys):
                _fail(source, f"{block}.{given[0]}", f"comes with {', '.join(keys)}; give all")
    if (doc.get("posterior") or {}).get("summary"):   # a summary is reported with its run
        _check_shape(source, "posterior", doc["posterior"], _SAMPLING)
    _check_parallax_unit(source, doc.get("parallax") or {})
    posterior = doc.get("posterior")
    if posterior is not None:
        if not isinstance(posterior, dict):
            _fail(source, "posterior", "must be an object")
        _check_posterior_priors(source, posterior)
        if posterior.get("draws_file") is not None:
            if not isinstance(posterior["draws_file"], str):
                _fail(source, "posterior.draws_file", "must be a file name (a string)")
            _check_draws(doc, source)
    return doc


def _check_count(source, key, value, low=0):
    if isinstance(value, bool) or not isinstance(value, int) or value < low:
        _fail(source, key, f"must be an integer >= {low}, not {value!r:.40}")


def _named_objects(source, key, block):
    if not isinstance(block, dict) or not all(isinstance(v, dict) for v in block.values()):
        _fail(source, key, "must be an object of one object per technique")
    return block.items()


def _check_techniques(source, stats):
    """statistics.techniques (per-technique residuals) and statistics.technique_scales."""
    if stats.get("techniques") is not None:
        for name, t in _named_objects(source, "statistics.techniques", stats["techniques"]):
            where = f"statistics.techniques.{name}"
            _check_count(source, f"{where}.n_points", t.get("n_points"), 1)
            for key in ("rms_theta_deg", "rms_rho_arcsec", "chi2", "reduced_chi2"):
                _check_number(source, f"{where}.{key}", t.get(key), 0.0)
            _check_number(source, f"{where}.dof", t.get("dof"), 0.0, strict="> 0")
    scales = stats.get("technique_scales")
    if scales is None:
        return
    if not isinstance(scales, dict):
        _fail(source, "statistics.technique_scales", "must be an object")
    _check_count(source, "statistics.technique_scales.rounds", scales.get("rounds"), 1)
    _check_count(source, "statistics.technique_scales.min_points", scales.get("min_points"), 1)
    if not isinstance(scales.get("converged"), bool):
        _fail(source, "statistics.technique_scales.converged", "must be true or false")
    for key in ("last_change", "tolerance"):
        _check_number(source, f"statistics.technique_scales.{key}", scales.get(key), 0.0)
    for name, f in _named_objects(source, "statistics.technique_scales.factors",
                                  scales.get("factors")):
        where = f"statistics.technique_scales.factors.{name}"
        _check_number(source, f"{where}.factor", f.get("factor"), 0.0, strict="> 0")
        _check_count(source, f"{where}.n_points", f.get("n_points"), 1)
        if not isinstance(f.get("estimated"), bool):
            _fail(source, f"{where}.estimated", "must be true or false")
        if f["estimated"]:
            _check_number(source, f"{where}.error", f.get("error"), 0.0)
        elif f.get("error") is not None or f["factor"] != 1.0:
            _fail(source, where, "is not estimated (too few points), so its factor must be 1 "
                  "and its error null")


def _check_draws(doc, source):
    """The draws file must be readable: every command that reads the document (mass,
    ephemeris, plan, report, compare) would use the draws, and silently falling back to
    the covariance would give other numbers than the document promises."""
    try:
        read_draws(draws_path(doc),
                   with_parallax=bool(doc["posterior"].get("parallax_prior")))
    except InputError as exc:
        raise InputError(f"{source}: its posterior draws file (posterior.draws_file "
                         f"{doc['posterior']['draws_file']!r}) cannot be used: {exc}. To go on "
                         "without the draws, remove the 'posterior' block from the document: "
                         "the commands then work from its covariance") from None


def _check_posterior_priors(source, posterior):
    """The posterior's Gaussian priors (names, finite means, sigma > 0) and parallax prior."""
    from .priors import PRIOR_NAMES

    gaussian = posterior.get("gaussian_priors")
    if gaussian is not None:
        if not isinstance(gaussian, dict):
            _fail(source, "posterior.gaussian_priors", "must be an object {name: {mean, sigma}}")
        for name, prior in gaussian.items():
            key = f"posterior.gaussian_priors.{name}"
            if name not in PRIOR_NAMES:
                _fail(source, key, f"names no element; priors are on {', '.join(PRIOR_NAMES)}")
            if not isinstance(prior, dict):
                _fail(source, key, "must be an object {mean, sigma}")
            _check_number(source, key + ".mean", prior.get("mean"))
            _check_number(source, key + ".sigma", prior.get("sigma"), low=0.0, strict="> 0")
    plx = posterior.get("parallax_prior")
    if plx is not None:
        if not isinstance(plx, dict):
            _fail(source, "posterior.parallax_prior", "must be an object {value, error, unit}")
        _check_number(source, "posterior.parallax_prior.value", plx.get("value"))
        _check_number(source, "posterior.parallax_prior.error", plx.get("error"), low=0.0)


# The shapes of the blocks that commands read (the report reads nearly all of them): a
# kind ('number', 'integer', 'string', 'boolean': null allowed; 'real', 'count': a number,
# an integer, not null; 'scale': an epoch scale), an object {key: shape}
# whose keys ending in '!' must be present (others are optional, null or absent; unknown
# keys are free),
# ('each', shape) for an object of like entries, ('list', shape) for a list, ('pair', shape)
# for a list of two. Keys of one block read together are in _TOGETHER.
_QUANTITY = {"value": "number", "error": "number", "low": "number", "high": "number",
             "low95": "number", "high95": "number", "median": "number", "unit": "string",
             "scale": "scale", "source": "string", "kind": "string"}
_VALUED = {**_QUANTITY, "value!": "number"}
_SAMPLING = {"walkers!": "count", "steps!": "count", "burn!": "count", "thin!": "count",
             "n_draws!": "count", "seed!": "integer", "acceptance_fraction": "number",
             "acceptance": "number", "sigma_scale": "real", "converged": "boolean",
             "autocorr_time": ("each", "real"), "priors": ("each", "string")}
_MASS = {**_QUANTITY, "linear": _VALUED}
_SHAPES = {
    "thiele_innes": ("each", _VALUED),
    "mass": {"total": _MASS, "primary": _MASS, "secondary": _MASS, "mass_ratio": _VALUED,
             "budget": ("each", "number"), "warnings": ("list", "string"), "draws!": "count",
             "seed": "integer", "parallax_used": "string", "draws_source": "string",
             "draws_nonpositive_parallax": "integer"},
    "mass_function": _QUANTITY,
    "parallax": {**_QUANTITY, "orbital": _QUANTITY, "combined": _QUANTITY},
    "orbital_parallax": _QUANTITY,
    "posterior": {**{k.rstrip("!"): v for k, v in _SAMPLING.items()},
                  "summary": ("each", {**_QUANTITY, "median!": "number"})},
    "combined": {"posterior": {**_SAMPLING, "parameters!": ("each", _VALUED)}},
    "residuals": ("list", {"line": "integer", "status": "string", "technique": "string",
                           **{k: "number" for k in (
                               "epoch", "epoch_yr", "theta_deg", "rho_arcsec", "theta_pred_deg",
                               "rho_pred_arcsec", "d_theta_deg", "d_rho_arcsec",
                               "sigma_theta_deg", "sigma_rho_arcsec")}}),
    "statistics": {**{k: "number" for k in ("chi2", "dof", "reduced_chi2", "rms_theta_deg",
                                             "rms_rho_arcsec", "phase_coverage", "fit_seconds",
                                             "epoch_first", "epoch_last")},
                   **{k: "integer" for k in ("n_input", "n_used", "n_flipped", "n_outliers",
                                             "n_excluded", "n_rejected", "n_trials")},
                   "errors_scaled": "boolean", "period_range_yr": ("pair", "real")},
    "options": {"period_range_yr": ("pair", "number"), "outlier_sigma": "number",
                "alternative_delta_chi2": "number", "flips": "boolean"},
    "fit": {"fixed": ("each", "number"), "period_bounds": ("pair", "number")},
    "precession": {"applied": "boolean", "target_ra_deg": "number", "target_dec_deg": "number",
                   "source": "string"},
    "notes": ("list", "string"), "name": "string", "source": "string",
}
_TOGETHER = {"statistics": (("epoch_first", "epoch_last"), ("rms_theta_deg", "rms_rho_arcsec"))}
_KINDS = {"number": (int, float), "real": (int, float), "integer": (int,), "count": (int,),
          "string": (str,), "scale": (str,), "boolean": (bool,)}


def _check_shape(source, where, value, shape):
    """``value`` has ``shape`` (see ``_SHAPES``), else an error naming ``where``."""
    if isinstance(shape, str):
        ok = (value is None and shape not in ("real", "count")) or (
            isinstance(value, _KINDS[shape]) and (shape == "boolean" or not isinstance(value, bool)))
        if ok and shape == "scale" and value is not None and value not in EPOCH_SCALES:
            _fail(source, where, f"is {value!r:.40}, not one of {', '.join(EPOCH_SCALES)}")
        if not ok:
            _fail(source, where, f"must be a {shape}, not {type(value).__name__} {value!r:.40}")
    elif isinstance(shape, tuple):
        kind, inner = shape
        if not isinstance(value, dict if kind == "each" else list):
            _fail(source, where, "must be an object" if kind == "each" else "must be a list")
        if kind == "pair" and len(value) != 2:
            _fail(source, where, f"must be a list of two, not of {len(value)}")
        items = value.items() if kind == "each" else enumerate(value)
        for key, item in items:
            _check_shape(source, f"{where}.{key}" if kind == "each" else f"{where}[{key}]",
                         item, inner)
    else:
        if not isinstance(value, dict):
            _fail(source, where, "must be an object")
        for key, inner in shape.items():
            name = key.rstrip("!")
            if value.get(name) is not None or (name in value and isinstance(inner, str)):
                _check_shape(source, f"{where}.{name}", value[name], inner)
            elif key.endswith("!"):
                _fail(source, f"{where}.{name}", "is missing")


def _check_parallax_unit(source, plx):
    if "unit" not in plx:
        return
    import astropy.units as u
    try:
        u.Unit(plx["unit"]).to(u.mas)
    except (ValueError, TypeError, u.UnitsError):
        _fail(source, "parallax.unit", f"is {plx['unit']!r:.40}, not an angle unit such as 'mas'")


def draws_path(doc):
    """Location of the posterior draws file (relative to the document)."""
    return Path(doc.get("_path", ".")).parent / doc["posterior"]["draws_file"]


def _element_value(doc, key):
    where = doc.get("_path", "result document")
    entry = doc["elements"].get(key)
    if entry is None:
        raise InputError(f"{where}: element '{key}' is missing; the elements block needs "
                         f"{', '.join(ELEMENT_KEYS)}")
    value = entry.get("value") if isinstance(entry, dict) else entry
    try:
        return float(value)
    except (TypeError, ValueError):
        raise InputError(f"{where}: element '{key}' has no numeric value ({value!r})") from None


def epoch_scale_of(doc):
    """Epoch scale of T in the document ('besselian' when not stated)."""
    entry = doc["elements"].get("T")
    scale = entry.get("scale", "besselian") if isinstance(entry, dict) else "besselian"
    if scale not in EPOCH_SCALES:
        raise InputError(f"{doc.get('_path', 'result document')}: element T has unknown "
                         f"scale {scale!r}; expected one of {', '.join(EPOCH_SCALES)}")
    return scale


def t_is_node_passage(elements):
    """Whether T of an elements block is the epoch of passage through the node, not of a
    periastron: e and omega both held at 0, a circular orbit's convention
    (``elements.CIRCULAR_NOTE``)."""
    return all(isinstance(elements.get(k), dict) and elements[k].get("fixed")
               and elements[k].get("value") == 0.0 for k in ("e", "omega"))


def elements_from_document(doc):
    """``CampbellElements`` (T as a Julian year) from a result document."""
    values = {k: _element_value(doc, k) for k in ELEMENT_KEYS}
    values["T"] = float(to_julian_year(values["T"], epoch_scale_of(doc)))
    try:
        return CampbellElements.from_keys(values)
    except ValueError as exc:
        raise InputError(f"{doc.get('_path', 'result document')}: {exc}") from None


#: The draws file can be large (many thousand draws); a cap still keeps a runaway bounded.
MAX_DRAWS_BYTES = 512 * 2 ** 20


def read_draws(path, with_parallax=False):
    """Posterior draws as an (n, 7) array in internal units, and the table's metadata.

    With ``with_parallax`` the array is (n, 8), the last column the sampled parallax [mas]
    (``fit --sample`` with a parallax prior); InputError when the file has none.

    The file is parsed once per content: validation and the command that then uses the
    draws share the reading (keyed by path, size and modification time).

    Raises
    ------
    InputError
        When the file cannot be read, is not an ECSV table, lacks one of the seven element
        columns, holds non-numeric or non-finite values, or has no rows.
    """
    path = Path(path)
    key = _content_key(path)
    if key is None:
        draws, parallax, meta = _parse_draws(path)  # let the reader give its clear message
    else:
        if key not in _PARSED_DRAWS:
            _keep_parsed(key, _parse_draws(path))
        draws, parallax, meta = _PARSED_DRAWS[key]
    if not with_parallax:
        return draws.copy(), dict(meta)
    if parallax is None:
        raise InputError(f"{path}: the posterior draws file has no parallax column (the "
                         "parallax was not sampled); rerun 'orbweigh fit --sample --parallax "
                         "VALUE ERROR'")
    return np.column_stack([draws, parallax]), dict(meta)


#: Draws parsed, by content key (path, size, modification time): two at most.
_PARSED_DRAWS = {}


def _keep_parsed(key, parsed):
    _PARSED_DRAWS[key] = parsed
    while len(_PARSED_DRAWS) > 2:
        _PARSED_DRAWS.pop(next(iter(_PARSED_DRAWS)))


def _content_key(path):
    try:
        stat = path.stat()
    except OSError:
        return None
    return str(path.resolve()), stat.st_size, stat.st_mtime_ns


def remember_draws(path, draws, parallax, meta):
    """Record draws just written to ``path`` as what reading it gives.

    The command that wrote the file (``fit --sample``, then its masses) need not parse it
    back: the writer (``ecsv.ecsv_text``) round-trips every float and metadata value
    exactly (tests/test_ecsv.py), so the content is known. Any later change of the file
    changes its key and it is parsed again.
    """
    key = _content_key(Path(path))
    if key is not None:
        _keep_parsed(key, (np.array(draws, float),
                           None if parallax is None else np.array(parallax, float), dict(meta)))


def _parse_draws(path):
    from astropy.table import Table

    from .tables import read_bounded_bytes
    data = read_bounded_bytes(path, MAX_DRAWS_BYTES, what="posterior draws file")
    try:
        table = Table.read(data.decode("utf-8").splitlines(), format="ascii.ecsv")
        draws = np.column_stack([np.asarray(table[k], float) for k in ELEMENT_KEYS])
    except KeyError as exc:
        raise InputError(f"{path}: the posterior draws file has no column {exc}; it needs "
                         f"{', '.join(ELEMENT_KEYS)} (rerun 'orbweigh fit --sample')") from None
    except Exception as exc:  # astropy raises many kinds for a foreign or broken table
        detail = " ".join(str(exc).split())[:200]   # one paragraph: astropy's has lines
        raise InputError(f"{path}: not a readable ECSV table of posterior draws "
                         f"({type(exc).__name__}: {detail}); rerun "
                         "'orbweigh fit --sample'") from None
    parallax = np.asarray(table["parallax"], float) if "parallax" in table.colnames else None
    if draws.shape[0] == 0 or not np.isfinite(draws).all() or (
            parallax is not None and not np.isfinite(parallax).all()):
        raise InputError(f"{path}: the posterior draws file has no rows or non-finite values; "
                         "rerun 'orbweigh fit --sample'")
    return draws, parallax, dict(table.meta)


def covariance_from_document(doc):
    """The document's 7x7 element covariance in ELEMENT_KEYS order, checked; or None.

    Raises
    ------
    InputError
        When the block misses an element, is not square, holds non-finite numbers or is
        not a symmetric positive semi-definite matrix.
    """
    cov = doc.get("covariance")
    if not cov:
        return None
    where = f"{doc.get('_path', 'result document')}: covariance"
    try:
        names = list(cov["parameters"])
        order = [names.index(k) for k in ELEMENT_KEYS]
        full = np.asarray(cov["matrix"], float)
    except (KeyError, TypeError, ValueError):
        raise InputError(f"{where}: expected 'parameters' naming {', '.join(ELEMENT_KEYS)} "
                         "and a numeric square 'matrix' in that order") from None
    if full.shape != (len(names), len(names)):
        raise InputError(f"{where}: the matrix is {'x'.join(map(str, full.shape))} but "
                         f"{len(names)} parameters are named")
    matrix = full[np.ix_(order, order)]
    if not np.isfinite(matrix).all():
        raise InputError(f"{where}: the matrix holds non-finite values; refit the orbit")
    scale = np.abs(matrix).max()
    if (not np.allclose(matrix, matrix.T, rtol=1e-6, atol=1e-12 * scale)
            or np.linalg.eigvalsh(matrix).min() < -1e-9 * scale):
        raise InputError(f"{where}: the matrix is not symmetric positive semi-definite, so "
                         "it cannot be an element covariance")
    return matrix


def element_draws(doc, n, seed, with_parallax=False):
    """Draws of the seven elements, shape (n, 7), internal units.

    From the posterior draws file when the document has one (resampled with the seed),
    else from a multivariate normal around the best elements with the document's
    covariance. Returns None when neither exists. ``with_parallax`` (posterior draws
    only) adds the sampled parallax [mas] as an eighth column.
    """
    rng = np.random.default_rng(seed)
    posterior = doc.get("posterior") or {}
    if posterior.get("draws_file"):
        draws, _ = read_draws(draws_path(doc), with_parallax=with_parallax)
        return draws[rng.choice(len(draws), size=min(n, len(draws)), replace=False)]
    matrix = covariance_from_document(doc)
    if matrix is None:
        return None
    best = np.array(elements_from_document(doc).as_tuple())
    draws = rng.multivariate_normal(best, matrix, size=n, method="eigh")
    # Keep the draws physical: e in [0, 1), a > 0, P > 0.
    draws[:, 2] = np.clip(np.abs(draws[:, 2]), 0.0, 0.999)
    draws[:, 0] = np.abs(draws[:, 0])
    draws[:, 3] = np.abs(draws[:, 3])
    return draws


def draws_for_masses(doc, n, seed, with_parallax=False):
    """(n, 7) element draws, their source, and the (P, a) covariance for the linear estimate.

    ``with_parallax``: (n, 8) posterior draws, the sampled parallax last.
    """
    draws = element_draws(doc, n, seed, with_parallax=with_parallax)
    if (doc.get("posterior") or {}).get("draws_file"):
        return draws, "posterior draws", None, []
    if draws is not None:
        idx = [ELEMENT_KEYS.index(k) for k in ("P", "a")]
        return draws, "covariance", covariance_from_document(doc)[np.ix_(idx, idx)], []
    draws = independent_draws(doc, n, seed, required=("P", "a"))
    errors = element_errors(doc)
    note = ("The result has no covariance matrix: P and a were drawn independently from "
            "their errors, ignoring their correlation.")
    return draws, "element errors", np.diag([errors["P"] ** 2, errors["a"] ** 2]), [note]


def element_errors(doc):
    """{key: 1-sigma error in internal units} of the elements that state one (T in yr)."""
    errors = {}
    for key in ELEMENT_KEYS:
        entry = doc["elements"][key]
        error = entry.get("error") if isinstance(entry, dict) else None
        if isinstance(error, (int, float)) and error >= 0:
            errors[key] = float(error)
    if "T" in errors and epoch_unit(epoch_scale_of(doc)) == "d":
        errors["T"] /= JULIAN_YEAR_D
    return errors


def independent_draws(doc, n, seed, required=()):
    """(n, 7) draws of the elements from their own errors, taken as independent; or None.

    Elements without an error are held fixed. None when no element has an error.

    Raises
    ------
    InputError
        When an element of ``required`` has no error.
    """
    errors = element_errors(doc)
    for key in required:
        if key not in errors:
            raise InputError(f"{doc.get('_path', 'result')}: no posterior draws, no covariance "
                             f"and no error for element '{key}': the mass needs the "
                             "uncertainty of P and a")
    if not any(errors.values()):
        return None
    best = np.array(elements_from_document(doc).as_tuple())
    sigma = [errors.get(k, 0.0) for k in ELEMENT_KEYS]
    draws = np.random.default_rng(seed).normal(best, sigma, size=(n, len(best)))
    draws[:, 2] = np.clip(np.abs(draws[:, 2]), 0.0, 0.999)
    draws[:, [0, 3]] = np.abs(draws[:, [0, 3]])
    return draws
