"""Posterior draws for the report's figures: the elements, the parallax and the mass."""
from __future__ import annotations

import numpy as np

from ..masses import total_mass_msun
from ..result import element_draws

__all__ = ["MAX_DRAWS", "posterior_draws", "parallax_mas", "mass_draws"]

#: At most this many draws go into the corner plots and histograms (ample for densities).
MAX_DRAWS = 20000


def posterior_draws(doc, seed):
    """Draws of the seven elements from the document's draws file, or None.

    Parameters
    ----------
    doc : dict
        Result document (as returned by ``result.load_result``).
    seed : int
        Seed of the subsampling when the file holds more than ``MAX_DRAWS`` draws.

    Returns
    -------
    ndarray, shape (n, 7), or None
        P [yr], T [Julian yr], e, a [arcsec], i, Omega, omega [deg]; None when the document
        names no draws file (covariance-based draws are not a posterior).
    """
    if not (doc.get("posterior") or {}).get("draws_file"):
        return None
    return element_draws(doc, MAX_DRAWS, seed)


def parallax_mas(doc):
    """(value, error) of the document's parallax [mas], or None when it has none."""
    plx = doc.get("parallax")
    if not isinstance(plx, dict) or plx.get("value") is None:
        return None
    import astropy.units as u
    scale = u.Unit(plx.get("unit", "mas")).to(u.mas)
    return float(plx["value"]) * scale, float(plx.get("error") or 0.0) * scale


def mass_draws(doc, draws, seed):
    """Total mass and parallax for each posterior draw, or None without a parallax.

    When the posterior sampled this very parallax with the elements (``fit --sample
    --parallax``), each draw's own parallax is used; else it is drawn from the normal
    distribution of the document's measured parallax (seeded). Draws with a non-positive
    parallax have no mass and are dropped, as the third law has no meaning there.

    Returns
    -------
    dict or None
        {"mass_msun", "parallax_mas", "a_arcsec", "P_yr"}: arrays of equal length.
    """
    plx = parallax_mas(doc)
    if draws is None or plx is None:
        return None
    prior = (doc.get("posterior") or {}).get("parallax_prior")
    if prior and (float(prior["value"]), float(prior["error"])) == plx:
        # the same seed picks the same rows as posterior_draws(doc, seed)
        plx_draws = element_draws(doc, MAX_DRAWS, seed, with_parallax=True)[:len(draws), 7]
    else:
        plx_draws = np.random.default_rng(seed).normal(plx[0], plx[1], size=len(draws))
    keep = plx_draws > 0
    P, a = draws[keep, 0], draws[keep, 3]
    return {"mass_msun": total_mass_msun(a, plx_draws[keep], P),
            "parallax_mas": plx_draws[keep], "a_arcsec": a, "P_yr": P}
