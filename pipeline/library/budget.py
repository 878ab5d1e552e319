"""The uncertainty budget of a library entry: the standard uncertainty of its H and S split
into named shares, so that sums over species (formation and reaction properties) keep the
correlations the library knows of.

Each share is a pair of signed standard-uncertainty contributions (to H [J/mol], to S
[J/(mol K)]) at every temperature; a sum Σ ν_i X_i over species adds the shares of one name
linearly and different names in quadrature (JCGM 100:2008, 5.2, with the correlations
below). The shares, by name:

- ``("fit", id, k)``: the k-th principal component of the covariance of entry ``id``'s scaled
  coefficients. H, S and G = H − T S of one fit move together, exactly.
- ``("model-h", id)``, ``("model-s", id)``, ``("extrap-h", id)``, ``("extrap-s", id)``: the
  form's misfit and the extrapolation model's share (library/document.py), for H and for S
  apart (their correlation is not known, so G takes them in quadrature).
- ``("transition", from, to)``: u(ΔH_trs), moving H by u and S by u/T_trs of every phase
  reached through that transition.
- ``("anchor-h", id)``, ``("anchor-s", id)``: u(ΔfH°) and u(S°) of the entry anchored at
  298.15 K (``anchor_u``).

A phase reached through a transition carries every share of the phase it is reached from,
taken at T_trs. Different species are independent unless they share a name: the phases of
one species linked by transitions are correlated through their common anchors and
transitions; no other correlation is assumed.
"""

from dataclasses import dataclass

import numpy as np

from ..core import chemistry, gridcache
from ..core.constants import GAS_CONSTANT as R
from ..core.constants import REFERENCE_TEMPERATURE
from ..core.gridcache import by_grid
from ..core.limits import DEFAULT_U_ANCHOR_H, DEFAULT_U_ANCHOR_S, DEFAULT_U_TRANSITION_REL
from ..physics import basis, forms
from .entries import by_id as entries_by_id

#: shares of an anchor's stated uncertainty (left out of u(H − H298) and u(S) of a table)
ANCHOR_SHARES = ("anchor-h", "anchor-s")


@dataclass(frozen=True)
class Budget:
    """H [J/mol], S [J/(mol K)] (and Cp) at temperatures t [K], with their shares."""

    t: np.ndarray
    h: np.ndarray
    s: np.ndarray
    shares: dict            # name -> (dH, dS) arrays

    @property
    def g(self) -> np.ndarray:
        return self.h - self.t * self.s


def anchor_u(entry: dict) -> dict:
    """{'enthalpy': u(ΔfH°) [J/mol], 'entropy': u(S°) [J/(mol K)], and their bases} of an entry
    anchored at 298.15 K, as the library records them (``stated_anchor_u`` for a library
    that records none)."""
    return entry.get("anchor_uncertainty") or stated_anchor_u(
        entry["formula"], entry["enthalpy_of_formation_298"])


def stated_anchor_u(formula: str, dfh: float, u_h: float | None = None,
                    u_s: float | None = None) -> dict:
    """The anchor uncertainties of a species of ``formula`` with ΔfH° = ``dfh`` [J/mol]: the
    stated ``u_h`` [J/mol] and ``u_s`` [J/(mol K)], else the common-practice defaults; u(ΔfH°)
    = 0 when ΔfH° = 0 for a pure element (exact by definition of its reference state)."""
    pure = len({e for e, _ in chemistry.composition(formula).elements if e != "e-"}) == 1
    zero = pure and dfh == 0.0
    h = (u_h, "stated") if u_h is not None else \
        (0.0, "definition") if zero else (DEFAULT_U_ANCHOR_H, "common practice")
    s = (u_s, "stated") if u_s is not None else (DEFAULT_U_ANCHOR_S, "common practice")
    return {"enthalpy": h[0], "enthalpy_basis": h[1], "entropy": s[0], "entropy_basis": s[1]}


def transition_u(x: dict) -> float:
    """u(ΔH_trs) [J/mol] of a library transition: stated, else 2 % of ΔH_trs (common
    practice)."""
    u = x.get("u_enthalpy")
    return u if u is not None else DEFAULT_U_TRANSITION_REL * abs(x["enthalpy"])


@by_grid(size=64)
def _integral_rows(t, kind, powers, bps, edges, tref) -> np.ndarray:
    """R times ``basis.integral_rows`` (J/mol or J/(mol K) per scaled coefficient): the
    entries of one range of use share their evaluated temperatures and a few dozen
    breakpoints (made once for each)."""
    return R * basis.integral_rows(list(powers), t, list(bps), list(edges), kind, tref)


@by_grid(size=64)
def _cp_rows(t, powers, bps) -> np.ndarray:
    """``basis.cp_rows``, made once for each grid and breakpoints (as ``_integral_rows``)."""
    return basis.cp_rows(list(powers), t, list(bps))


def own_shares(entry: dict, t, extrap: dict | None = None) -> dict:
    """The shares of one entry's own fit at ``t`` [K]: its covariance components, its form's
    misfit and its extrapolation model (H and S relative to its anchor temperature;
    ``extrap``: its ``extrapolation_share`` at ``t`` when made already)."""
    t = np.atleast_1d(np.asarray(t, dtype=float))
    sid = entry.get("id", "")
    fit, model, extrap = _own_parts(entry, t, extrap)
    out = {}
    if fit is not None:
        dh, ds, w, _ = fit
        for k in np.flatnonzero(w > 0):
            out[("fit", sid, int(k))] = (dh[:, k], ds[:, k])
    zero = np.zeros_like(t)
    for name, share in (("model", model), ("extrap", extrap)):
        if share:
            out[(f"{name}-h", sid)] = (share["u_H"], zero)
            out[(f"{name}-s", sid)] = (zero, share["u_S"])
    return out


def own_spread(entry: dict, t, extrap: dict | None = None) -> dict:
    """{'u_Cp', 'u_H', 'u_S'} of one entry's own fit at ``t`` [K]: ``cp_share`` and the u_H
    and u_S of ``spread(own_shares(...))``, the same numbers (the squares of the same shares
    summed in the same order), made without naming each share (an evaluated table of every
    species takes them)."""
    return own_spreads([(entry, t, extrap)])[0]


def own_spreads(items) -> list:
    """``own_spread(entry, t, extrap)`` of each (entry, t, extrap) of ``items``, the same
    numbers to the last bit: the covariances of the entries taken apart in one stacked call
    per size, and their components at the temperatures in one stacked product per grid and
    breakpoints (numpy's stacked eigh and matrix product act on each matrix alone); the
    entries of one grid and breakpoints with a model error and no extrapolation (a
    partition's evaluated tables, mostly) then summed together (``_spreads_alike``)."""
    ts = [np.atleast_1d(np.asarray(t, dtype=float)) for _, t, _ in items]
    entries = [entry for entry, _, _ in items]
    fits = _fits(entries, ts)
    out, alike = [None] * len(items), {}
    for i, ((entry, _, extrap), t, fit) in enumerate(zip(items, ts, fits)):
        extrap = extrapolation_share(entry, t) if extrap is None else extrap
        model = (entry.get("uncertainty") or {}).get("model_error")
        if fit is not None and not extrap and model:
            alike.setdefault((t.tobytes(), _fit_key(entry), fit[0].shape, len(model)),
                             []).append(i)
        else:
            out[i] = _spread(entry, t, fit, extrap)
    for (_, key, _, _), idx in alike.items():
        for i, got in zip(idx, _spreads_alike([entries[i] for i in idx], ts[idx[0]], key,
                                              [fits[i] for i in idx])):
            out[i] = got
    return out


def _spread(entry: dict, t, fit, extrap: dict) -> dict:
    """``own_spread`` of one entry from its ``_fits`` item and extrapolation share."""
    unc = entry.get("uncertainty") or {}
    model = model_share(unc.get("model_error") or [], entry.get("breakpoints", []), t,
                        _anchor_t(entry))
    zero = np.zeros_like(t)[None]
    h, s = [], []
    if fit is not None:
        dh, ds, w, _ = fit
        keep = (w > 0).nonzero()[0]
        h.append(dh[:, keep].T)
        s.append(ds[:, keep].T)
    for share in (model, extrap):
        if share:
            h += [share["u_H"][None], zero]
            s += [zero, share["u_S"][None]]
    return {"u_H": _quadrature(np.concatenate(h)) if h else zero[0],
            "u_S": _quadrature(np.concatenate(s)) if s else zero[0],
            "u_Cp": cp_share(entry, t, extrap or {}, model, fit)}


def _spreads_alike(entries, t, key, fits) -> list:
    """``_spread`` of entries at the same temperatures ``t`` [K] with the same ``_fit_key``
    ``key``, each with a covariance (``fits``) and a model error and no extrapolation share:
    the same sums in the same order, every entry at once. The squares of the components
    left out (eigenvalue ≤ 0) are zeros in the running sum, which leave it as it is."""
    _, bps, _, tref = key
    cp, model_h, model_s = _model_bounds(
        _model_errors([e["uncertainty"]["model_error"] for e in entries]),
        forms.range_of(t, bps), t, tref)
    kept = np.stack([f[2] for f in fits])[:, None, :] > 0
    u_h = np.where(kept, np.stack([f[0] for f in fits]) ** 2, 0.0).cumsum(axis=2)[:, :, -1]
    u_s = np.where(kept, np.stack([f[1] for f in fits]) ** 2, 0.0).cumsum(axis=2)[:, :, -1]
    u_h = np.sqrt(u_h + model_h ** 2)            # then the model's row (and a zero one)
    u_s = np.sqrt(u_s + model_s ** 2)            # a zero row, then the model's
    u_cp = np.hypot(np.stack([f[3] for f in fits]), cp)
    return [{"u_H": u_h[k], "u_S": u_s[k], "u_Cp": u_cp[k]} for k in range(len(entries))]


def _anchor_t(entry: dict) -> float:
    """The temperature [K] H and S of ``entry`` are exact at (its anchor's)."""
    return (entry.get("anchor") or {}).get("temperature", REFERENCE_TEMPERATURE)


def _fit_key(entry: dict) -> tuple:
    """(powers, breakpoints, edges, anchor temperature) of an entry's ``_integral_rows``."""
    unc = entry.get("uncertainty") or {}
    bps = entry.get("breakpoints", [])
    edges = [entry["ranges"][0]["t_min"]] + list(bps) + [entry["ranges"][-1]["t_max"]]
    return tuple(unc.get("powers") or []), tuple(bps), tuple(edges), _anchor_t(entry)


def _fits(entries, ts) -> list:
    """(dH, dS, eigenvalues, u(Cp)) of the covariance of each of ``entries`` at its
    temperatures ``ts[i]``: its components' shares of H and S, and the standard deviation of
    Cp it gives (``cp_share``'s first term); or None without a covariance."""
    covs = [np.asarray((e.get("uncertainty") or {}).get("covariance") or [], dtype=float)
            for e in entries]
    by_shape = {}
    for i, cov in enumerate(covs):
        if cov.size:
            by_shape.setdefault(cov.shape, []).append(i)
    roots, ws = {}, {}
    for idx in by_shape.values():
        stack = np.stack([covs[i] for i in idx])
        w, v = np.linalg.eigh((stack + np.swapaxes(stack, 1, 2)) / 2)
        root = v * np.sqrt(w.clip(0.0, None))[:, None, :]          # cov = root @ root.T
        for k, i in enumerate(idx):
            roots[i], ws[i] = root[k], w[k]
    by_rows = {}
    for i in roots:
        by_rows.setdefault((ts[i].tobytes(), _fit_key(entries[i]), covs[i].shape),
                           []).append(i)
    out = [None] * len(entries)
    for (_, key, _), idx in by_rows.items():
        t = ts[idx[0]]
        stack = np.stack([roots[i] for i in idx])
        dh, ds = (_integral_rows(t, kind, *key) @ stack for kind in ("H", "S"))
        rows = _cp_rows(t, *key[:2])
        # basis.standard_deviation of each covariance (the same sums, stacked)
        u_cp = R * np.sqrt(np.maximum(np.einsum("ni,bij,nj->bn", rows,
                                                np.stack([covs[i] for i in idx]), rows), 0.0))
        for k, i in enumerate(idx):
            out[i] = (dh[k], ds[k], ws[i], u_cp[k])
    return out


def _own_parts(entry: dict, t, extrap) -> tuple:
    """(``_fits`` of the entry at ``t``, the model share, the extrapolation share) of one
    entry (``own_shares``)."""
    unc = entry.get("uncertainty") or {}
    fit = _fits([entry], [t])[0]
    model = model_share(unc.get("model_error") or [], entry.get("breakpoints", []), t,
                        _anchor_t(entry))
    return fit, model, extrapolation_share(entry, t) if extrap is None else extrap


#: ``cp_share``'s default ``fit``: made there
_MADE_HERE = object()


def cp_share(entry: dict, t, extrap: dict | None = None, model: dict | None = None,
             fit=_MADE_HERE) -> np.ndarray:
    """u(Cp) [J/(mol K)] of one entry at ``t`` [K]: covariance, misfit and extrapolation
    (``extrap``: its ``extrapolation_share`` at ``t``, ``model`` its ``model_share``, ``fit``
    its ``_fits`` item, when made already)."""
    t = np.atleast_1d(np.asarray(t, dtype=float))
    unc = entry.get("uncertainty") or {}
    fit = _fits([entry], [t])[0] if fit is _MADE_HERE else fit
    u = fit[3] if fit is not None else np.zeros_like(t)
    for share in (model_share(unc.get("model_error") or [], entry.get("breakpoints", []), t)
                  if model is None else model,
                  extrapolation_share(entry, t, integrals=False) if extrap is None
                  else extrap):
        if share:
            u = np.hypot(u, share["u_Cp"])
    return u


def spread(shares: dict, t, anchors: bool = True) -> dict:
    """{'u_H', 'u_S', 'u_G'}: standard uncertainties of H [J/mol], S [J/(mol K)] and G = H − T S
    [J/mol] at ``t`` [K] from ``shares`` (those of the anchors left out unless ``anchors``)."""
    t = np.atleast_1d(np.asarray(t, dtype=float))
    kept = [pair for name, pair in shares.items() if anchors or name[0] not in ANCHOR_SHARES]
    if not kept:
        return {key: np.zeros_like(t) for key in ("u_H", "u_S", "u_G")}
    dh, ds = (np.array([p[k] if np.shape(p[k]) == t.shape else np.broadcast_to(p[k], t.shape)
                        for p in kept], dtype=float) for k in (0, 1))
    return {"u_H": _quadrature(dh), "u_S": _quadrature(ds), "u_G": _quadrature(dh - t * ds)}


def _quadrature(rows) -> np.ndarray:
    """The rows (shares) of ``rows`` added in quadrature, column by column: the squares
    summed share by share, in order (a cumulative sum is sequential: the same numbers as a
    loop over the shares; a sum over an axis need not be)."""
    return np.sqrt((rows ** 2).cumsum(axis=0)[-1])


def combine(parts) -> dict:
    """The shares of Σ ν_i X_i for ``parts`` = [(ν_i, shares_i)]: shares of one name added
    linearly, so that correlated species cancel where they should."""
    out = {}
    for nu, shares in parts:
        for name, (dh, ds) in shares.items():
            h0, s0 = out.get(name, (0.0, 0.0))
            out[name] = (h0 + nu * dh, s0 + nu * ds)
    return out


def on_rows(shares: dict, rows) -> dict:
    """``shares`` of the temperatures selected by the mask ``rows``, zero at the others."""
    out = {}
    for name, pair in shares.items():
        full = np.zeros((2, len(rows)))
        full[:, rows] = pair
        out[name] = (full[0], full[1])
    return out


class Budgets:
    """The budgets of the entries of one library document (``at``), phases reached through
    transitions included."""

    def __init__(self, doc: dict):
        self.by_id = entries_by_id(doc)
        self.links = {(x["from"], x["to"]): x for x in doc.get("transitions", [])}

    def at(self, sid: str, t) -> Budget:
        """The budget of entry ``sid`` at ``t`` [K] (inside its range of use)."""
        entry = self.by_id[sid]
        t = np.atleast_1d(np.asarray(t, dtype=float))
        got = _evaluate(entry, t)
        return Budget(t=t, h=got["H"] + self.zero_offset(sid), s=got["S"],
                      shares={**self.anchor_shares(sid, len(t)), **own_shares(entry, t)})

    def add(self, total: dict, nu: float, ids, t) -> None:
        """Add ν times the budget of entry ``ids[i]`` at ``t[i]`` [K] (None: skipped) to
        ``total`` = {'h', 's' arrays, 'parts' list of (ν, shares), 'extrapolated' mask}."""
        for sid in dict.fromkeys(i for i in ids if i is not None):
            rows = np.array([i == sid for i in ids])
            b = self.at(sid, t[rows])
            total["h"][rows] += nu * b.h
            total["s"][rows] += nu * b.s
            total["parts"].append((nu, on_rows(b.shares, rows)))
            data = self.by_id[sid]["data_range"]
            total["extrapolated"][rows] |= (t[rows] < data["t_min"]) | (t[rows] > data["t_max"])

    def zero_offset(self, sid: str) -> float:
        """ΔfH° of the phase that anchors ``sid`` minus H(298.15 K) of that phase's
        coefficients [J/mol] (round-off): added to H, it makes H(298.15 K) equal ΔfH°
        exactly."""
        root = self.by_id[sid]
        while (root.get("anchor") or {}).get("basis") == "transition":
            root = self.by_id[root["anchor"]["via"]]
        fitted = _evaluate(root, np.array([REFERENCE_TEMPERATURE]))["H"][0]
        return float(root["enthalpy_of_formation_298"] - fitted)

    def anchor_shares(self, sid: str, n: int) -> dict:
        """The shares entry ``sid`` takes from its anchors: u(ΔfH°), u(S°) of an entry
        anchored at 298.15 K; for a phase reached through a transition, the shares of the
        phase it is reached from at T_trs and u(ΔH_trs). Constant in T (``n`` values)."""
        entry = self.by_id[sid]
        a = entry.get("anchor") or {}
        ones = np.ones(n)
        if a.get("basis") != "transition":
            u = anchor_u(entry)
            return {("anchor-h", sid): (u["enthalpy"] * ones, 0.0 * ones),
                    ("anchor-s", sid): (0.0 * ones, u["entropy"] * ones)}
        via, tt = a["via"], a["temperature"]
        up = (via, sid) in self.links
        x = self.links.get((via, sid)) or self.links[(sid, via)]
        before = self.at(via, [tt])
        out = {k: (dh[0] * ones, ds[0] * ones) for k, (dh, ds) in before.shares.items()}
        sign = 1.0 if up else -1.0
        u = transition_u(x)
        out[("transition", x["from"], x["to"])] = (sign * u * ones, sign * u / tt * ones)
        return out


def _evaluate(entry: dict, t) -> dict:
    return forms.evaluate_ranges(entry["ranges"], t, entry["form"])


def model_share(model_error, bps, t, tref=REFERENCE_TEMPERATURE) -> dict:
    """The form's own misfit by range; for H and S never more than the Cp share integrated
    from the anchor temperature ``tref`` [K] (they are exact there)."""
    if not model_error:
        return {}
    cp, h, s = _model_bounds(_model_errors([model_error]), forms.range_of(t, bps), t, tref)
    return {"u_Cp": cp[0], "u_H": h[0], "u_S": s[0]}


def _model_errors(model_errors) -> np.ndarray:
    """(entries, ranges, 3): the cp, h and s of each range of each entry's model error."""
    return np.array([[[m[k] for k in ("cp", "h", "s")] for m in me] for me in model_errors])


def _model_bounds(errors, j, t, tref) -> tuple:
    """``model_share``'s u_Cp, u_H and u_S (entries, temperatures) of the ``_model_errors``
    ``errors`` at ``t`` [K] in ranges ``j``, exact at ``tref`` [K]."""
    at = errors[:, j]
    cp = at[:, :, 0]
    return (cp, np.minimum(at[:, :, 1], cp * np.abs(t - tref)),
            np.minimum(at[:, :, 2], cp * np.abs(np.log(t / tref))))


def extrapolation_share(species: dict, t, steps: int = 256, integrals: bool = True) -> dict:
    """Inside each model-filled interval: u_rel(T) Cp(T), u_rel growing from its value at the
    data edge to its value at the far end in proportion to |ln(T/edge)|. The share is
    systematic, so u(H) at T adds up u_rel Cp over the part of 298.15 K..T it covers, and u(S)
    u_rel Cp / T: trapezoids on one geometric grid of ``steps`` points across the interval,
    summed once and read at both ends of each part; without ``integrals``, u_Cp only."""
    guided = [e for e in species.get("extrapolated", []) if e.get("u_rel_end") is not None]
    if not guided:
        return {}
    tref = REFERENCE_TEMPERATURE
    high = species["data_range"]["t_max"]
    out = {"u_Cp": np.zeros_like(t), "u_H": np.zeros_like(t), "u_S": np.zeros_like(t)}
    n = len(t)
    for e in guided:
        # u_Cp from t alone, the very call made without integrals (the same numbers)
        out["u_Cp"] = out["u_Cp"] + _u_abs(species, e, high, t)
        if not integrals:
            continue
        lo, hi = e["t_min"], e["t_max"]
        ends = np.concatenate([np.minimum(t, tref), np.maximum(t, tref)])
        ends = np.minimum(np.maximum(ends, lo), hi)       # both ends of each part, inside
        grid = gridcache.geomspace(lo, hi, steps) if hi > lo else np.array([lo])
        f_ends, f_grid = np.split(_u_abs(species, e, high, np.concatenate([ends, grid])),
                                  [2 * n])
        # ∫ from the interval's start to each end: the trapezoids of the grid up to the
        # grid point below it, and one from there to the end
        k = np.minimum(np.searchsorted(grid, ends, side="right"), len(grid)) - 1
        k = np.maximum(k, 0)
        part = ends - grid[k]
        for key, f, g in (("u_H", f_grid, f_ends), ("u_S", f_grid / grid, f_ends / ends)):
            total = np.concatenate([[0.0], np.cumsum(np.diff(grid) * (f[1:] + f[:-1]) / 2)])
            at = total[k] + part * (f[k] + g) / 2
            out[key] = out[key] + (at[n:] - at[:n])
    return out


def _u_abs(species: dict, e: dict, high: float, x) -> np.ndarray:
    """u_rel(T) Cp(T) [J/(mol K)] of extrapolated interval ``e`` of ``species`` (whose data
    end at ``high`` [K]) at ``x`` [K], zero outside the interval (Cp evaluated inside it
    only)."""
    edge, far = (e["t_min"], e["t_max"]) if e["t_max"] >= high else (e["t_max"], e["t_min"])
    start = e.get("u_rel_start") or 0.0
    inside = (x >= e["t_min"] * (1 - 1e-12)) & (x <= e["t_max"] * (1 + 1e-12))
    xi = x[inside]
    rel = start + (e["u_rel_end"] - start) * (np.abs(np.log(xi / edge))
                                             / (abs(np.log(far / edge)) or 1.0))
    out = np.zeros_like(x)
    out[inside] = rel * _cp_across(species, e["t_min"], e["t_max"], xi)
    return out


def _cp_across(species: dict, lo: float, hi: float, x) -> np.ndarray:
    """Cp [J/(mol K)] of ``species`` at ``x`` [K] inside lo..hi: from the one range that
    holds lo..hi when there is one (at a breakpoint that ends it, that range's value: equal
    to the other's to rounding, the fit being continuous there), else range by range."""
    for r in species["ranges"]:
        if r["t_min"] <= lo and hi <= r["t_max"]:
            f = forms.FORMS[species["form"]]
            return f.cp(f.unpack(r["coefficients"])[0], x)
    return forms.cp_of_ranges(species["ranges"], x, species["form"])
