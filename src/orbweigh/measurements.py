"""Measurement logs of a resolved pair: reading, validation, and the ``MeasurementSet``."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["RowProblem", "MeasurementSet"]


@dataclass(frozen=True)
class RowProblem:
    """A log line that could not be used, and why."""

    line: int
    column: str | None
    reason: str


@dataclass
class MeasurementSet:
    """Validated relative positions, one entry per accepted log line.

    Attributes
    ----------
    source : str
        Path (or name) of the log.
    line : ndarray of int
        1-based line number of each measurement in the source file.
    epoch_yr : ndarray
        Epoch as a decimal Julian year (TT), the internal time axis.
    epoch_text : ndarray of str
        The epoch exactly as written in the log.
    epoch_scale : str
        How the log wrote epochs: 'besselian', 'julian', 'jd', 'mjd' or 'iso'; results
        give epochs back in this scale (see ``reductions.format_epoch``).
    theta_deg : ndarray
        Position angle [deg], reduced to equinox J2000 when target coordinates were given.
    theta_input_deg : ndarray
        Position angle as written in the log [deg].
    rho_arcsec, sigma_theta_deg, sigma_rho_arcsec : ndarray
        Separation and the 1-sigma uncertainties [arcsec, deg, arcsec].
    weight : ndarray
        Extra weight w (default 1): the effective sigma is sigma / sqrt(w).
    technique : ndarray of str
        Observing technique (free text, lower case; defaults table keys recognised).
    sigma_defaulted : ndarray of bool
        True where a sigma was missing and the technique's default was used.
    excluded : ndarray of bool
        True where the user's ``flag`` column excludes the row from fitting.
    note : ndarray of str
        The log's note column.
    rejected : list of RowProblem
        Lines that were read but could not be used, with the reason.
    n_lines : int
        Number of data lines in the file (accepted + rejected).
    meta : dict
        Metadata of the log (e.g. target coordinates from an ECSV header).
    """

    source: str
    line: np.ndarray
    epoch_yr: np.ndarray
    epoch_text: np.ndarray
    epoch_scale: str
    theta_deg: np.ndarray
    theta_input_deg: np.ndarray
    rho_arcsec: np.ndarray
    sigma_theta_deg: np.ndarray
    sigma_rho_arcsec: np.ndarray
    weight: np.ndarray
    technique: np.ndarray
    sigma_defaulted: np.ndarray
    excluded: np.ndarray
    note: np.ndarray
    rejected: list = field(default_factory=list)
    n_lines: int = 0
    meta: dict = field(default_factory=dict)

    def __len__(self):
        return len(self.line)

    @property
    def usable(self):
        """Boolean mask of rows not excluded by the user."""
        return ~self.excluded

    @classmethod
    def from_arrays(cls, epoch_yr, theta_deg, rho_arcsec, sigma_theta_deg, sigma_rho_arcsec,
                    technique="unknown", source="<arrays>", epoch_scale="julian"):
        """Build a set directly from arrays (programmatic use and tests)."""
        t = np.asarray(epoch_yr, float)
        n = t.size
        full = lambda v, dtype=float: np.broadcast_to(np.asarray(v, dtype), (n,)).copy()  # noqa: E731
        theta = np.mod(full(theta_deg), 360.0)
        return cls(source=source, line=np.arange(1, n + 1), epoch_yr=t,
                   epoch_text=np.array([repr(float(v)) for v in t]), epoch_scale=epoch_scale,
                   theta_deg=theta, theta_input_deg=theta.copy(), rho_arcsec=full(rho_arcsec),
                   sigma_theta_deg=full(sigma_theta_deg), sigma_rho_arcsec=full(sigma_rho_arcsec),
                   weight=np.ones(n), technique=full(technique, object).astype(str),
                   sigma_defaulted=np.zeros(n, bool), excluded=np.zeros(n, bool),
                   note=np.array([""] * n), n_lines=n)
