"""Fitting stage for published coefficient sets: adopt a sound set as it is, or repair a
defective one into a continuous set with the constrained fitter.

``adopt`` keeps the coefficients bit for bit (only the entropy constant of a gas tabulated
at another pressure moves to 1 bar, and a note says so); its quality is measured against
its own evaluated table. ``repair`` refits the set's evaluated Cp, H − H298 and S with
``fit_species`` in the set's form, over its range, anchored to the set's own H(298.15 K)
and S°, with its breakpoints unless asked otherwise; it records the published ranges and
the largest change of Cp, H and S the repair made on a dense grid over the set's range.
"""

from dataclasses import replace

import numpy as np

from ..core.constants import STANDARD_PRESSURE
from ..core.records import CpData, FitRange, FitResult, SpeciesIdentity, TableMeta
from ..core.settings import FitSettings
from ..physics import forms, statmech
from .species import fit_species

#: codes of the defects a repair mends (steps and kinks at breakpoints)
REPAIRABLE = ("SET-STEP", "SET-STEP-STRICT", "SET-KINK")
#: points of the grid the largest change of a repair is measured on
CHANGE_POINTS = 2001


def published_ranges(meta: TableMeta) -> tuple:
    """FitRange of each range of the set, ascending in T, with the entropy constant of an
    ideal gas moved to 1 bar when the source tabulates at another pressure."""
    published = meta.published
    form = forms.FORMS[published.form]
    shift = 0.0
    if meta.phase == "g" and meta.source.standard_pressure != STANDARD_PRESSURE:
        shift = statmech.entropy_shift_to_standard(meta.source.standard_pressure)
    out = []
    for t_min, t_max, coefficients, _ in published.ordered:
        c = list(coefficients)
        if shift:
            c[len(form.powers) + 1] += shift / form.multiplier
        out.append(FitRange(t_min, t_max, tuple(c)))
    return tuple(out)


def _origin(meta: TableMeta, defects) -> dict:
    published = meta.published
    return {"kind": "published set", "source": meta.source.id, "file": meta.file,
            "lines": sorted(published.lines), "form": published.form,
            "defects": sorted(set(defects))}


def adopt(meta: TableMeta, data, defects=()) -> FitResult:
    """The published set as the species' result, coefficients unchanged; its quality against
    its evaluated table ``data`` (Rows) is exact by construction."""
    ranges = published_ranges(meta)
    t = np.asarray(data["T"], dtype=float)
    got = forms.evaluate_ranges(ranges, t, meta.published.form)
    rel = np.abs(got["Cp"] / np.asarray(data["Cp"], dtype=float) - 1.0)
    dh = got["H"] - meta.enthalpy_of_formation_298 - np.asarray(data["dH"], dtype=float)
    ds = got["S"] - np.asarray(data["S"], dtype=float)
    origin = {**_origin(meta, defects), "repair": "not needed" if not any(
        c in REPAIRABLE for c in defects) else "not requested"}
    return FitResult(form=meta.published.form, ranges=ranges,
                     breakpoints=tuple(r.t_max for r in ranges[:-1]),
                     data_t_min=ranges[0].t_min, data_t_max=ranges[-1].t_max, points=len(t),
                     cp_max_rel_dev=float(rel.max()), cp_rms_rel_dev=float(np.sqrt(np.mean(rel ** 2))),
                     worst_t=float(t[int(np.argmax(rel))]), weighting="relative",
                     h_max_dev=float(np.nanmax(np.abs(dh))), s_max_dev=float(np.nanmax(np.abs(ds))),
                     acceptance={"rule": "published"}, origin=origin)


def largest_change(before, after, form: str) -> dict:
    """{'Cp', 'H', 'S'}: the largest |after − before| [SI] over the range of ``before``
    (FitRange sequences), with where it is and, for Cp, relative to Cp."""
    t = np.linspace(before[0].t_min, before[-1].t_max, CHANGE_POINTS)
    a, b = forms.evaluate_ranges(before, t, form), forms.evaluate_ranges(after, t, form)
    out = {}
    for name in ("Cp", "H", "S"):
        diff = b[name] - a[name]
        k = int(np.argmax(np.abs(diff)))
        out[name] = {"change": float(diff[k]), "temperature": float(t[k])}
        if name == "Cp":
            out[name]["relative"] = float(diff[k] / a[name][k])
    return out


def repair(meta: TableMeta, data, settings: FitSettings, defects=()) -> FitResult:
    """The set refitted into a continuous one (see the module docstring); FitError or
    FitRejected when the fitter cannot or the refit fails its acceptance rule."""
    published = meta.published
    before = published_ranges(meta)
    over = dict(form=published.form, ranges=len(before), use_t_min=None, use_t_max=None)
    if published.keep_breakpoints and len(before) > 1:
        over.update(breakpoint_mode="fixed", fixed_breakpoints=published.breakpoints)
    result = fit_species(SpeciesIdentity.of_table(meta), CpData.of_rows(data),
                         replace(settings, **over))
    change = largest_change(before, result.ranges, published.form)
    origin = {**_origin(meta, defects), "repair": "repaired",
              "keep_breakpoints": published.keep_breakpoints,
              "published_ranges": [{"t_min": r.t_min, "t_max": r.t_max,
                                    "coefficients": list(r.coefficients)} for r in before],
              "largest_change": change}
    cp, h, s = change["Cp"], change["H"], change["S"]
    note = (f"{meta.species_id}: the {published.form} set of {meta.file} was refitted into a "
            f"continuous set ({', '.join(origin['defects'])}); largest changes: Cp "
            f"{cp['change']:+.4g} J/(mol*K) ({100 * cp['relative']:+.3g} %) at {cp['temperature']:g} K, "
            f"H {h['change']:+.4g} J/mol at {h['temperature']:g} K, S {s['change']:+.4g} "
            f"J/(mol*K) at {s['temperature']:g} K")
    return replace(result, origin=origin, notes=result.notes + (("SET-REPAIRED", note),))


def settle(meta: TableMeta, data, settings: FitSettings, wanted: bool, defects=()) -> FitResult:
    """The result of a published set: repaired when ``wanted`` and it has a repairable
    defect, else adopted as published."""
    if wanted and any(c in REPAIRABLE for c in defects):
        return repair(meta, data, settings, defects)
    return adopt(meta, data, defects)

