"""Coverage checks: gaps that leave the fit ungrounded, a range of use beyond the data."""

import numpy as np

from ..core.findings import finding
from ..core.settings import for_table


def check_gaps(table, ctx):
    """COV-GAP findings: gaps between consecutive temperatures [K] wider than the settings' ratio
    and width."""
    s = ctx.checks
    d = table.valid
    t, lines = d["T"], d["line"]
    out = []
    wide = (t[1:] / t[:-1] > s.gap_ratio) & (t[1:] - t[:-1] > s.gap_width)
    for i in wide.nonzero()[0].tolist():
        out.append(finding("COV-GAP", f"no data between {t[i]:.6g} K and {t[i + 1]:.6g} K",
                           **table.meta.where, column="T",
                           line=int(lines[i + 1]), lines=(int(lines[i]), int(lines[i + 1])),
                           seen=f"{t[i + 1] - t[i]:.6g} K",
                           expected=f"gaps <= {s.gap_width:g} K or a ratio <= {s.gap_ratio:g}"))
    return out


def check_range_of_use(table, ctx):
    """COV-EXTRAPOLATED findings: a range of use [K] of the table's fit settings that reaches
    beyond its data."""
    f = for_table(ctx.fit, table.meta.fit_overrides)
    t = table.data["T"]
    t = t[np.isfinite(t) & (t > 0)]
    if not len(t):
        return []
    where = dict(table.meta.where, column="T")
    out = []
    if f.use_t_max is not None and f.use_t_max > t.max():
        out.append(finding("COV-EXTRAPOLATED", f"range of use goes to {f.use_t_max:g} K but the "
                           f"data stop at {t.max():.6g} K; {t.max():.6g}-{f.use_t_max:g} K is "
                           "extrapolated", seen=f"{t.max():.6g} K",
                           expected=f">= {f.use_t_max:g} K", **where))
    if f.use_t_min is not None and f.use_t_min < t.min():
        out.append(finding("COV-EXTRAPOLATED", f"range of use starts at {f.use_t_min:g} K but "
                           f"the data start at {t.min():.6g} K; {f.use_t_min:g}-{t.min():.6g} K is "
                           "extrapolated", seen=f"{t.min():.6g} K",
                           expected=f"<= {f.use_t_min:g} K", **where))
    return out
