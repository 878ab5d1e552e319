"""The batched path of the fitting stage: the breakpoints of many species searched at once.

Computed catalogues give many species the same temperatures. Their breakpoint searches
(breakchoice.choose) differ only in the Cp rows, so the searches that share their
temperatures, fit settings and form are made together: every candidate of every species is
solved in one batched call (breakchoice.choose_many), in chunks of CHUNK species. A fit
makes one search on its rows (data and any extension), and a second on the data alone when
a high-side extension must leave the data alone (species.Prepared.searches); both are
batched, so the species extrapolated to the same range of use share theirs too. Each
species then takes the rest of the per-species path (species.fit_species with its
``prepared`` rows and ``chosen`` breakpoints): the final solve, the integration constants,
the uncertainties and the acceptance test are the same code for every species.

A search whose temperatures, settings or form no other search of the partition shares
(several sources, excluded points, its own overrides) is made alone, as before. A species
whose preparation or batched search raises is left to the per-species path, which reports
why; so is every species of a chunk whose batched call raises.
"""

import numpy as np

from ..core.errors import let_through
from ..physics import forms
from . import breakchoice, species

#: searches made in one batched call (bounds the memory of the batched KKT systems: about
#: 0.2 MB per search with 80 candidates of two seven-term ranges)
CHUNK = 64


def choices(items) -> dict:
    """{key: (Prepared, {role: (breakpoints, notes, Choice)})} of the species of ``items``,
    each (key, who, data, settings, previous) as species.fit_species takes them: every
    species prepared here (species.prepare, extension models included), with the searches
    made in a batch; a species whose preparation fails is left out."""
    prepared, groups = {}, {}
    for key, who, data, settings, previous in items:
        try:
            prepared[key] = species.prepare(who, data, settings)
            searches = prepared[key].searches(data)
        except Exception as exc:  # noqa: BLE001 - the per-species path reports what is wrong
            let_through(exc)
            prepared.pop(key, None)
            continue
        for role, (t, y, sig) in searches.items():
            groups.setdefault((t.tobytes(), settings), []).append(
                ((key, role), t, y, sig, previous))
    chosen = {}
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
            except Exception as exc:  # noqa: BLE001 - searched alone, each reports what is wrong
                let_through(exc)
                continue
            chosen.update((m[0], g) for m, g in zip(chunk, got) if not isinstance(g, ValueError))
    out = {key: (prep, {}) for key, prep in prepared.items()}
    for (key, role), got in chosen.items():
        out[key][1][role] = got
    return out
