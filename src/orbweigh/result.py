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
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from .elements import ELEMENT_KEYS, CampbellElements
from .errors import InputError
from .reductions import EPOCH_SCALES, to_julian_year

__all__ = ["SCHEMA", "load_result", "elements_from_document", "element_draws", "epoch_scale_of",
           "read_draws", "draws_for_masses", "covariance_from_document"]

SCHEMA = "orbweigh.result/1"


def load_result(path):
    """Read a result (or bare elements) JSON document, with clear errors."""
    path = Path(path)
    try:
        text = path.read_text()
    except OSError as exc:
        raise InputError(f"{path}: cannot read the file ({exc.strerror})") from None
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"{path}, line {exc.lineno}: not valid JSON ({exc.msg})") from None
    if not isinstance(doc, dict) or not isinstance(doc.get("elements"), dict):
        raise InputError(f"{path}: expected a JSON object with an 'elements' block "
                         "(P, T, e, a, i, Omega, omega), as written by 'orbweigh fit --json'")
    doc["_path"] = str(path)
    elements_from_document(doc)  # validates now rather than deep inside a command
    return doc


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


def elements_from_document(doc):
    """``CampbellElements`` (T as a Julian year) from a result document."""
    values = {k: _element_value(doc, k) for k in ELEMENT_KEYS}
    values["T"] = float(to_julian_year(values["T"], epoch_scale_of(doc)))
    try:
        return CampbellElements.from_keys(values)
    except ValueError as exc:
        raise InputError(f"{doc.get('_path', 'result document')}: {exc}") from None


def read_draws(path):
    """Posterior draws as an (n, 7) array in internal units, and the table's metadata."""
    from astropy.table import Table
    table = Table.read(path, format="ascii.ecsv")
    return np.column_stack([np.asarray(table[k], float) for k in ELEMENT_KEYS]), dict(table.meta)


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


def element_draws(doc, n, seed):
    """Draws of the seven elements, shape (n, 7), internal units.

    From the posterior draws file when the document has one (resampled with the seed),
    else from a multivariate normal around the best elements with the document's
    covariance. Returns None when neither exists.
    """
    rng = np.random.default_rng(seed)
    posterior = doc.get("posterior") or {}
    if posterior.get("draws_file"):
        path = Path(doc.get("_path", ".")).parent / posterior["draws_file"]
        draws, _ = read_draws(path)
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


def draws_for_masses(doc, n, seed):
    """(n, 7) element draws, their source, and the (P, a) covariance for the linear estimate."""
    draws = element_draws(doc, n, seed)
    if (doc.get("posterior") or {}).get("draws_file"):
        return draws, "posterior draws", None, []
    if draws is not None:
        idx = [ELEMENT_KEYS.index(k) for k in ("P", "a")]
        return draws, "covariance", covariance_from_document(doc)[np.ix_(idx, idx)], []
    errors = []
    for key in ELEMENT_KEYS:
        entry = doc["elements"][key]
        error = entry.get("error") if isinstance(entry, dict) else None
        if key in ("P", "a") and not (isinstance(error, (int, float)) and error >= 0):
            raise InputError(f"{doc.get('_path', 'result')}: no posterior draws, no covariance and no error "
                             f"for element '{key}': the mass needs the uncertainty of P and a")
        errors.append(float(error) if isinstance(error, (int, float)) else 0.0)
    best = np.array(elements_from_document(doc).as_tuple())
    draws = np.random.default_rng(seed).normal(best, errors, size=(n, len(best)))
    draws[:, [0, 3]] = np.abs(draws[:, [0, 3]])
    note = ("The result has no covariance matrix: P and a were drawn independently from "
            "their errors, ignoring their correlation.")
    return draws, "element errors", np.diag([errors[0] ** 2, errors[3] ** 2]), [note]
