"""Evaluated tables: Cp, H − H298, S, −(G − H298)/T and H at standard temperatures.

For every species, at 298.15 K and then every ``step`` kelvin (or a given grid) over its
range of use, with the standard uncertainties of the fit and a flag for rows outside the
data (extrapolated). ``release.tables`` writes them as Parquet and CSV.
"""

import numpy as np

from ..core.constants import REFERENCE_TEMPERATURE
from ..physics import forms
from . import document as library

COLUMNS = ("id", "T", "Cp", "u_Cp", "H_minus_H298", "u_H", "S", "u_S", "gef", "H",
           "extrapolated")
HEADERS = {"gef": "gef = -(G-H298)/T"}  # the Gibbs energy function
UNITS = {"T": "K", "Cp": "J/(mol*K)", "u_Cp": "J/(mol*K)", "H_minus_H298": "J/mol",
         "u_H": "J/mol", "S": "J/(mol*K)", "u_S": "J/(mol*K)", "gef": "J/(mol*K)", "H": "J/mol"}


def grid(t_min, t_max, step=100.0, points=None):
    """298.15 K (when in range), then every ``step`` K inside [t_min, t_max], ends included."""
    if points is not None:
        t = np.asarray(sorted(points), dtype=float)
        return t[(t >= t_min) & (t <= t_max)]
    t = np.arange(np.ceil(t_min / step) * step, t_max + step, step)
    t = np.concatenate([[t_min], t[(t > t_min) & (t < t_max)], [t_max]])
    if t_min <= REFERENCE_TEMPERATURE <= t_max:
        t = np.append(t, REFERENCE_TEMPERATURE)
    return np.unique(t)


def species_rows(sp, step=100.0, points=None) -> dict:
    """Columns of the evaluated table of one library species entry."""
    t = grid(sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"], step, points)
    ev = library.evaluate_entry(sp, t)
    h298 = forms.evaluate_ranges(library.ranges_of(sp), [REFERENCE_TEMPERATURE], sp["form"])["H"][0]
    return {"id": [sp["id"]] * len(t), "T": t, "Cp": ev["Cp"], "u_Cp": ev["u_Cp"],
            "H_minus_H298": ev["H"] - h298, "u_H": ev["u_H"], "S": ev["S"], "u_S": ev["u_S"],
            "gef": -(ev["G"] - h298) / t, "H": ev["H"],
            "extrapolated": ev["extrapolated"].astype(bool)}
