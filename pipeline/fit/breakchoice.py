"""Which breakpoints a fit uses, and why: fixed, conventional, or optimised with a preference
for stable ones.

An optimised set (breakpoints.optimise, rms objective by default) is compared with the set
on offer: with two ranges the conventional breakpoint; then, when they differ from that
choice and still suit the data, the previous release's breakpoints of the species. The
offered set is kept unless the optimum lowers the weighted sum of squares χ² of the Cp rows
by more than ``breakpoint_stability``: a release-to-release diff then shows changes of the
data, not of the optimiser. The choice is recorded (``Choice``) and explained in a
FIT-BREAKPOINT note; a rebuild offered the same set reproduces it, and a build offered the
set it would choose anyway records the fresh choice (two builds of the same data agree).
"""

from dataclasses import dataclass, replace

import numpy as np

from ..core.settings import FitSettings
from . import breakpoints


def points_per_range(form, settings: FitSettings) -> int:
    """Fewest points a range may hold: the setting, and never fewer than the range's
    coefficients plus two (a range determined by as many points as it has free coefficients
    has wild, cancelling coefficients)."""
    return max(settings.min_points_per_range, len(form.powers) + 2)


@dataclass(frozen=True)
class Choice:
    """How optimised breakpoints were chosen (recorded in the library)."""

    optimum: tuple           # [K], the optimiser's set
    offered: tuple = ()      # [K], the set on offer (empty: none)
    offered_by: str = ""     # "previous release" or "conventional"
    chi2_gain: float = 0.0   # how much lower χ² is at the optimum than at the offered set
    kept: bool = False       # the offered set was kept

    def to_dict(self) -> dict:
        return {"optimum": list(self.optimum), "offered": list(self.offered),
                "offered_by": self.offered_by, "chi2_gain": self.chi2_gain, "kept": self.kept}


def _fixed(t, settings: FitSettings):
    bps = sorted(float(b) for b in settings.fixed_breakpoints)
    edges = [float(t[0])] + bps + [float(t[-1])]
    narrow = breakpoints.too_narrow(edges, settings.min_range_ratio, 1e-12)
    if narrow:
        a, b = narrow
        raise ValueError(f"the range {a:.6g}-{b:.6g} K of the fixed breakpoints is only "
                         f"{b / a:.4g} times wider at the top than at the bottom; every "
                         f"range must be at least {settings.min_range_ratio:g} times wider")
    return bps


@dataclass(frozen=True)
class _Search:
    """What ``_plan`` leaves to the optimiser: ``nr`` ranges under ``rules``, with ``notes``."""

    nr: int
    rules: breakpoints.SearchRules
    notes: list


def _plan(t, form, settings: FitSettings):
    """What the temperatures ``t`` alone decide: the final (breakpoints, notes, None) of a
    fixed, conventional or single-range choice, or the _Search to run on the data."""
    need = points_per_range(form, settings)
    nr = settings.ranges
    if settings.breakpoint_mode == "fixed":
        return _fixed(t, settings), [], None
    note = None
    span, ratio = float(t[-1] / t[0]), settings.min_range_ratio
    if nr > 1 and len(t) < nr * need:
        fewer = max(1, len(t) // need)
        note = ("COV-RANGE-POINTS", f"{len(t)} points cannot fill {nr} ranges of at least "
                f"{need}; fitted with {fewer} range(s)")
        nr = fewer
    if nr > 1 and span < ratio ** nr:
        fewer = max(1, int(np.floor(np.log(span) / np.log(ratio))))
        note = ("COV-RANGE-POINTS", f"the data span {t[0]:.6g}-{t[-1]:.6g} K, too narrow for "
                f"{nr} ranges each at least {ratio:g} times wider at the top than at the "
                f"bottom; fitted with {fewer} range(s)")
        nr = fewer
    if note is None and settings.breakpoint_mode == "conventional" and nr == 2:
        conv = breakpoints.conventional(t, nr, settings.breakpoint, need, ratio)
        if conv:
            return conv, [], None
        note = ("COV-RANGE-POINTS", f"{int((t <= settings.breakpoint).sum())} point(s) at or "
                f"below and {int((t > settings.breakpoint).sum())} above {settings.breakpoint:g} "
                f"K (at least {need} needed on each side, each range at least {ratio:g} times "
                "wider at the top than at the bottom); breakpoint optimised instead")
    elif note is None and settings.breakpoint_mode == "conventional" and nr > 2:
        note = ("COV-RANGE-POINTS", f"the conventional breakpoint serves two ranges; the "
                f"breakpoints of {nr} ranges were optimised")
    notes = [note] if note else []
    if nr == 1:
        return [], notes, None
    rules = breakpoints.SearchRules(order=settings.continuity, norm=settings.breakpoint_norm,
                                    need=need, bounds=(settings.breakpoint_min,
                                                       settings.breakpoint_max),
                                    max_candidates=settings.max_candidates, ratio=ratio)
    return _Search(nr, rules, notes)


def choose(t, y, sigma, form, settings: FitSettings, previous=None):
    """(breakpoints [K], notes, Choice or None) for Cp/R rows ``y`` ± ``sigma`` at ``t``;
    ``previous`` the previous release's breakpoints of the species (or None). ValueError
    when the data cannot hold the requested ranges."""
    plan = _plan(t, form, settings)
    if not isinstance(plan, _Search):
        return plan
    obs = breakpoints.Observations(t, y, sigma)
    best = breakpoints.optimise(obs, form.powers, plan.nr, plan.rules)
    if settings.breakpoint_mode != "optimise":
        return best, plan.notes, None
    conv = breakpoints.conventional(t, plan.nr, settings.breakpoint, plan.rules.need,
                                    plan.rules.ratio)
    steady = _steady(obs, form, plan.rules, best, settings,
                     (tuple(conv), "conventional") if conv else None)
    return _offer_previous(obs, form, plan, best, settings, previous, steady)


def _offer_previous(obs, form, plan: _Search, best, settings, previous, steady):
    """The choice ``steady`` (breakpoints, note, Choice), or the previous release's
    breakpoints kept by ``_steady`` when they suit the data and differ from it; with the
    plan's notes."""
    bps, why, choice = steady
    if _suits(obs.t, previous, plan.nr, plan.rules) and tuple(previous) != tuple(bps):
        # a rebuild offered what a fresh build chooses records the fresh choice, so a second
        # build from the same data gives the same release
        bps, why, choice = _steady(obs, form, plan.rules, best, settings,
                                   (tuple(float(b) for b in previous), "previous release"))
    return bps, plan.notes + ([why] if why else []), choice


def choose_many(t, ys, sigmas, form, settings: FitSettings, previous) -> list:
    """``choose`` of many tables that share their temperatures ``t`` (and settings): for each
    row of ``ys`` ± ``sigmas`` (S, n) and its entry of ``previous``, (breakpoints, notes,
    Choice) or the ValueError ``choose`` raises. The same choices, figure for figure, as
    ``choose`` of each table alone: the two-range search and the comparison with the
    conventional breakpoint are solved for all tables in one batched call each
    (breakpoints.optimise_many, lsq.batch_objectives), everything else as ``choose`` does
    it."""
    try:
        plan = _plan(t, form, settings)
    except ValueError as exc:
        return [exc] * len(ys)
    if not isinstance(plan, _Search):
        return [(list(plan[0]), list(plan[1]), plan[2])] * len(ys)
    if plan.nr != 2:
        return [_attempt(choose, t, y, sig, form, settings, prev)
                for y, sig, prev in zip(ys, sigmas, previous)]
    # the two batched calls share what they make of the tables before the candidates (when
    # there are points enough for the search: the calls make it themselves otherwise)
    made = breakpoints.prepared(t, ys, sigmas, form.powers) \
        if len(t) >= max(2 * plan.rules.need, len(form.powers)) else None
    bests = breakpoints.optimise_many(t, ys, sigmas, form.powers, plan.rules, made)
    conv = breakpoints.conventional(t, plan.nr, settings.breakpoint, plan.rules.need,
                                    plan.rules.ratio)
    out = [None] * len(ys)
    ok = [i for i, b in enumerate(bests) if not isinstance(b, ValueError)]
    for i, b in enumerate(bests):
        if isinstance(b, ValueError):
            out[i] = b
        elif settings.breakpoint_mode != "optimise":
            out[i] = (b, list(plan.notes), None)
    if settings.breakpoint_mode != "optimise" or not ok:
        return out
    rms = None
    if conv:
        sets = np.array([[conv, bests[i]] for i in ok], dtype=float)
        rms = breakpoints.objectives_for(t, ys[ok], sigmas[ok], form.powers, sets,
                                         replace(plan.rules, norm="rms"),
                                         None if made is None else made.rows(ok))
    for row, i in enumerate(ok):
        obs = breakpoints.Observations(t, ys[i], sigmas[i])
        steady = _settled(obs, bests[i], settings, (tuple(conv), "conventional"), rms[row]) \
            if conv else (bests[i], None, Choice(optimum=tuple(bests[i])))
        out[i] = _offer_previous(obs, form, plan, bests[i], settings, previous[i], steady)
    return out


def _attempt(f, *args):
    """f(*args), or the ValueError it raises."""
    try:
        return f(*args)
    except ValueError as exc:
        return exc


def _suits(t, previous, nr: int, rules) -> bool:
    """Whether the previous release's breakpoints suit the data: as many ranges, inside the
    allowed interval, every range wide enough and holding enough points."""
    if previous is None or len(previous) != nr - 1:
        return False
    edges = [float(t[0])] + [float(b) for b in previous] + [float(t[-1])]
    lo, hi = rules.bounds
    counts = np.diff(np.searchsorted(t, edges[1:-1], side="right"), prepend=0, append=len(t))
    return bool(breakpoints.too_narrow(edges, rules.ratio, 1e-12) is None
                and counts.min() >= rules.need
                and (lo is None or edges[1] >= lo) and (hi is None or edges[-2] <= hi))


def _steady(obs, form, rules, best, settings: FitSettings, offer):
    """(breakpoints, note, Choice): the offered set instead of the optimum ``best`` unless the
    optimum lowers χ² of the Cp rows by more than ``breakpoint_stability``."""
    if offer is None:
        return best, None, Choice(optimum=tuple(best))
    rms = breakpoints.objective_for(obs, form.powers, np.array([offer[0], best], dtype=float),
                                    replace(rules, norm="rms"))
    return _settled(obs, best, settings, offer, rms)


def _settled(obs, best, settings: FitSettings, offer, rms):
    """``_steady`` of the rms objectives ``rms`` of the offered set and of ``best``."""
    offered, by = offer
    gain = max(0.0, len(obs.t) * float(rms[0] ** 2 - rms[1] ** 2))
    kept = gain <= settings.breakpoint_stability
    choice = Choice(optimum=tuple(best), offered=offered, offered_by=by, chi2_gain=gain,
                    kept=kept)
    shown = "/".join(f"{b:g}" for b in offered)
    if kept:
        return list(offered), ("FIT-BREAKPOINT", f"breakpoint(s) {shown} K of the {by} kept: "
                               f"the optimum, {'/'.join(f'{b:g}' for b in best)} K, lowers "
                               f"chi2 by only {gain:.3g} (<= {settings.breakpoint_stability:g})"
                               ), choice
    return list(best), ("FIT-BREAKPOINT", f"breakpoint(s) moved from {shown} K ({by}) to "
                        f"{'/'.join(f'{b:g}' for b in best)} K: chi2 lower by {gain:.3g} (> "
                        f"{settings.breakpoint_stability:g})"), choice
