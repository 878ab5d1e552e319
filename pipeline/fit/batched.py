"""The batched path of the fitting stage: the breakpoints of many species searched at once.

Computed catalogues give many species the same temperatures. Their breakpoint searches
(breakchoice.choose) differ only in the Cp rows, so the species that share temperatures,
fit settings and form are searched together: every candidate of every species is solved in
one batched call (breakchoice.choose_many), in chunks of CHUNK species. Each species then
takes the rest of the per-species path (species.fit_species with its ``chosen``
breakpoints): the final solve, the integration constants, the uncertainties and the
acceptance test are the same code for every species.

A species whose fit carries an extrapolation model's rows (species.extended), or whose
temperatures, settings or form no other species of the partition shares (several sources,
excluded points, its own overrides), is searched alone, as before. A species the batched
search cannot serve (its search raises) is left to the per-species path, which reports why;
so is a whole chunk whose batched call raises.
"""

import numpy as np

from ..physics import forms
from . import breakchoice, species

#: species searched in one batched call (bounds the memory of the batched KKT systems: about
#: 0.2 MB per species with 80 candidates of two seven-term ranges)
CHUNK = 64


def choices(items) -> dict:
    """{key: (breakpoints, notes, Choice)} of the species of ``items``, each (key, who,
    data, settings, previous) as species.fit_species takes them, for those searched in a
    batch; the others are left out (fit_species searches them alone)."""
    groups = {}
    for key, who, data, settings, previous in items:
        try:
            if settings.form not in forms.FORMS or species.extended(who, data, settings):
                continue
            t, y, sig = species.search_rows(data, settings)
        except Exception:  # noqa: BLE001 - the per-species path reports what is wrong
            continue
        groups.setdefault((t.tobytes(), settings), []).append((key, t, y, sig, previous))
    out = {}
    for (_, settings), members in groups.items():
        if len(members) < 2:
            continue
        form = forms.FORMS[settings.form]
        for first in range(0, len(members), CHUNK):
            chunk = members[first:first + CHUNK]
            try:
                got = breakchoice.choose_many(chunk[0][1], np.array([m[2] for m in chunk]),
                                              np.array([m[3] for m in chunk]), form,
                                              settings, [m[4] for m in chunk])
            except Exception:  # noqa: BLE001 - searched alone, each reports what is wrong
                continue
            out.update((m[0], g) for m, g in zip(chunk, got) if not isinstance(g, ValueError))
    return out
