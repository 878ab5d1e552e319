"""The fitting stage: multi-range constrained least squares (``species``), breakpoint
search (``breakpoints``), extrapolation past the data (``extrapolate``) and the solver
(``lsq``).

``fit_species``, ``FitRejected`` and the submodules load on first use (PEP 562), so that
``check``, which fits nothing, starts without the solver's libraries."""

import importlib

__all__ = ["FitRejected", "fit_species"]


def __getattr__(name: str):
    if name in __all__:
        return getattr(importlib.import_module(".species", __name__), name)
    try:
        return importlib.import_module(f".{name}", __name__)
    except ModuleNotFoundError:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}") from None
