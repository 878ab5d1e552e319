"""The fitting stage: multi-range constrained least squares (``species``), breakpoint
search (``breakpoints``), extrapolation past the data (``extrapolate``) and the solver
(``lsq``)."""

from .species import FitRejected, fit_species

__all__ = ["FitRejected", "fit_species"]
