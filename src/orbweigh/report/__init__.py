"""Figures, the self-contained HTML report and tables for papers, from a result document."""
from .figures import (plot_corner_elements, plot_corner_masses, plot_mass_histogram,
                      plot_orbit, plot_residuals)
from .posterior import mass_draws, posterior_draws
from .tables import elements_latex, residuals_table
from .writer import FIGURE_FORMATS, write_report

__all__ = ["plot_orbit", "plot_residuals", "plot_corner_elements", "plot_corner_masses",
           "plot_mass_histogram", "posterior_draws", "mass_draws",
           "elements_latex", "residuals_table", "FIGURE_FORMATS", "write_report"]
