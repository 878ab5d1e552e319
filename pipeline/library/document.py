"""Read a curated library and evaluate its species (the consumer side of export)."""

import difflib
import errno
from pathlib import Path

import numpy as np

from ..core import jsonread, schemas
from ..core.constants import REFERENCE_TEMPERATURE
from ..core.errors import InputError, SpeciesNotFound
from ..core.limits import MAX_LIBRARY_BYTES
from ..core.names import species_name
from ..physics import forms
from . import budget
from .entries import by_id as entries_by_id

#: relative tolerance at the ends of the range of use (round-off in a stored end)
END_TOLERANCE = 1e-12

#: name of the link in a release home that points at the published release
CURRENT = "current"


def load(path) -> dict:
    """library.json from a file or a curated folder; InputError with a clear message otherwise."""
    p = Path(path)
    if p.is_dir():
        p = release_folder(p) / "library.json"  # one release, even while a build publishes
    if not p.is_file():
        raise InputError(f"no library at {p}", expected="a library.json file or a curated folder")
    if p.stat().st_size > MAX_LIBRARY_BYTES:
        raise InputError(f"{p} is larger than {MAX_LIBRARY_BYTES} bytes",
                         expected="a library.json written by thermoledger")
    data = p.read_bytes()
    doc = jsonread.canonical(data)       # as thermoledger writes it: read at once
    if doc is None:                      # anything else: read strictly, and judged
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise InputError(f"{p} is not UTF-8 text (byte {exc.start})") from None
        doc = jsonread.loads(text, file=str(p))
    if not isinstance(doc, dict) or doc.get("library_format") != 1:
        raise InputError(f"{p} is not a thermoledger library", expected="library_format 1")
    errors = schemas.errors_of(doc, "library.schema.json")
    if errors:
        e = errors[0]
        raise InputError(f"{p} breaks the library schema at {schemas.where(e)}: "
                         f"{e.message[:200]} "
                         f"({len(errors)} problem(s))",
                         expected="a library.json written by thermoledger")
    return doc


def find_species(doc: dict, name: str, phase: str | None = None) -> dict:
    """The species entry of ``doc`` named ``name`` (see ``resolve_id``)."""
    by_id = entries_by_id(doc)
    return by_id[resolve_id(by_id, name, phase)]


def resolve_id(ids, name: str, phase: str | None = None) -> str:
    """The species id that ``name`` means among ``ids``: the id itself ('CO2(g)'), the same
    id in another case, or a name without its phase ('CO2', 'co2') when one phase has it;
    ``phase`` names the phase. SpeciesNotFound (a KeyError) with the candidates otherwise."""
    if not isinstance(name, str):
        raise SpeciesNotFound(repr(name))
    if phase is not None:
        name = f"{name.rsplit('(', 1)[0] if name.endswith(')') else name}({phase})"
    if name in ids:
        return name
    folded = name.casefold()
    for match in ((lambda i: i.casefold() == folded),
                  (lambda i: species_name(i) == name),
                  (lambda i: species_name(i).casefold() == folded)):
        hits = sorted(i for i in ids if match(i))
        if len(hits) == 1:
            return hits[0]
        if len(hits) > 1:
            raise SpeciesNotFound(name, hits, ambiguous=True)
    raise SpeciesNotFound(name, _close(name, ids))


def chain(transitions, name: str) -> tuple:
    """(the transitions of species ``name`` (any case) among a library's 'transitions', the
    species ids of its phases in order on heating); both empty when it has none."""
    links = [x for x in transitions if x["species"].casefold() == name.casefold()]
    return links, ([links[0]["from"]] + [x["to"] for x in links] if links else [])


def phases_at(doc: dict, name: str, temperatures, phase: str | None = None) -> list:
    """The species id to evaluate at each of ``temperatures`` [K]: the one ``name`` (and
    ``phase``) means, or, for a name whose phases are linked by transitions, the phase
    stable at each temperature (the phase below at a transition temperature itself).
    SpeciesNotFound or InputError (outside every phase's stable range) otherwise."""
    by_id = entries_by_id(doc)
    try:
        return [resolve_id(by_id, name, phase)] * len(temperatures)
    except SpeciesNotFound as exc:
        links, ids = chain(doc.get("transitions", []), name)
        if not (exc.ambiguous and links):
            raise
    edges = chain_edges(by_id, links, ids)
    where = stable_index(edges, temperatures)
    if (where < 0).any():
        t = np.asarray(temperatures, dtype=float)[where < 0][0]
        raise InputError(f"T = {t:g} K is outside the range where a phase of {name} is "
                         "stable in the library", expected=f"{edges[0]:g} K <= T <= "
                         f"{edges[-1]:g} K")
    return [ids[k] for k in where]


def chain_edges(by_id: dict, links, ids) -> list:
    """[T_min of the first phase, T_trs ..., T_max of the last] [K] of the phases ``ids``
    linked by the transitions ``links`` (one phase: its range of use)."""
    return [by_id[ids[0]]["ranges"][0]["t_min"]] + [x["temperature"] for x in links] + \
        [by_id[ids[-1]]["ranges"][-1]["t_max"]]


def stable_index(edges, temperatures) -> np.ndarray:
    """For each T [K], the k with edges[k] <= T <= edges[k + 1] (the lower k at an edge), or
    -1 outside every interval (NaN included)."""
    t = np.atleast_1d(np.asarray(temperatures, dtype=float))
    e = np.asarray(edges, dtype=float)
    k = np.clip(np.searchsorted(e, t, side="left") - 1, 0, len(e) - 2)
    inside = (t >= e[0]) & (t <= e[-1])
    return np.where(inside, k, -1)


def evaluate_phases(doc: dict, ids, temperatures) -> dict:
    """``evaluate_entry`` of entry ``ids[i]`` at ``temperatures[i]`` [K], row by row."""
    by_id = entries_by_id(doc)
    t = np.asarray(temperatures, dtype=float)
    out = {}
    for sid in dict.fromkeys(ids):
        rows = np.array([i for i, x in enumerate(ids) if x == sid])
        got = evaluate_entry(by_id[sid], t[rows])
        for k, v in got.items():
            out.setdefault(k, np.zeros(len(t), dtype=v.dtype))[rows] = v
    return out


def _close(name: str, ids) -> tuple:
    """Up to three ids whose id or name (without the phase) is close to ``name``, in any
    case."""
    keys = {}
    for i in sorted(ids):
        keys.setdefault(i.casefold(), i)
        keys.setdefault(species_name(i).casefold(), i)
    hits = difflib.get_close_matches(name.casefold(), list(keys), n=6, cutoff=0.5)
    return tuple(dict.fromkeys(keys[h] for h in hits))[:3]


def ranges_of(species: dict) -> list:
    """(t_min [K], t_max [K], coefficients) of each range of a library species entry."""
    return forms.as_ranges(species["ranges"])


def check_range(species: dict, t) -> None:
    """InputError unless every T [K] is finite and inside the range of use of ``species``."""
    lo, hi = species["ranges"][0]["t_min"], species["ranges"][-1]["t_max"]
    # the ends themselves are inside, also when written with a last-digit difference
    slack = END_TOLERANCE * max(abs(lo), abs(hi))
    bad = t[(t < lo - slack) | (t > hi + slack) | ~np.isfinite(t)]
    if len(bad):
        raise InputError(f"T = {bad[0]:g} K is outside the range of use of {species['id']}",
                         expected=f"{lo:g} K <= T <= {hi:g} K")


def evaluate_entry(species: dict, temperatures) -> dict:
    """Cp, H, S, G at ``temperatures`` [K], their standard uncertainties (u_Cp, u_H, u_S) and
    an 'extrapolated' flag; raises InputError outside the range of use."""
    return evaluate_entries([(species, temperatures)])[0]


def evaluate_entries(items) -> list:
    """``evaluate_entry(species, temperatures)`` of each (species, temperatures) of
    ``items``, the polynomials of the species of one form evaluated in one pass
    (forms.evaluate_many: the same numbers as one by one)."""
    ts = [np.atleast_1d(np.asarray(t, dtype=float)) for _, t in items]
    for (species, _), t in zip(items, ts):
        check_range(species, t)
    out = forms.evaluate_forms([(species["form"], ranges_of(species), t)
                                for (species, _), t in zip(items, ts)])
    uncs = uncertainties([species for species, _ in items], ts)
    for (species, _), t, ev, u in zip(items, ts, out, uncs):
        ev.update(u)
        data = species["data_range"]
        ev["extrapolated"] = (t < data["t_min"]) | (t > data["t_max"])
    return out


def uncertainty(species: dict, t) -> dict:
    """Standard uncertainties of Cp [J/(mol K)], H [J/mol], S [J/(mol K)] at ``t`` [K] by the
    library's convention (fit/uncertainty.py): the parameter share from the stored covariance
    of the scaled coefficients (H and S relative to their exact anchors at 298.15 K or at a
    transition), the model error of the form in each range, the extrapolation model's share,
    whose integral from 298.15 K enters H and S, and for a phase reached through transitions
    the stated u(ΔH_trs) of each transition on the way (u/T_trs for S); the shares are added
    in quadrature (library/budget.py names them)."""
    return uncertainties([species], [t])[0]


def uncertainties(species, ts) -> list:
    """``uncertainty(species[i], ts[i])`` of each entry, their fits' shares made together
    (budget.own_spreads: the same numbers)."""
    ts = [np.atleast_1d(np.asarray(t, dtype=float)) for t in ts]
    spreads = budget.own_spreads([(sp, t, budget.extrapolation_share(sp, t))
                                  for sp, t in zip(species, ts)])
    out = []
    for sp, got in zip(species, spreads):
        anchor = sp.get("anchor") or {}
        out.append({"u_Cp": got["u_Cp"],
                    "u_H": np.hypot(got["u_H"], anchor.get("u_enthalpy", 0.0)),
                    "u_S": np.hypot(got["u_S"], anchor.get("u_entropy", 0.0))})
    return out


def anchor_temperature(species: dict) -> float:
    """T [K] where H and S of a library entry are fixed: 298.15 K, or the transition a phase
    is reached through."""
    return (species.get("anchor") or {}).get("temperature", REFERENCE_TEMPERATURE)


def enthalpy_zero(species: dict) -> float:
    """H(298.15 K) [J/mol] that H − H298 of a library entry counts from: its own ΔfH°, or
    that of the phase stable at 298.15 K for a phase reached through transitions."""
    a = species.get("anchor")
    if a:
        return a["enthalpy_zero"]
    return float(forms.h_of_ranges(ranges_of(species), [REFERENCE_TEMPERATURE],
                                   species["form"])[0])


def release_folder(path) -> Path:
    """The one release a reader should read: ``path/current`` resolved once when ``path``
    is a release home, else ``path`` itself."""
    p = Path(path)
    cur = p / CURRENT
    try:
        return cur.resolve(strict=True) if cur.is_symlink() else p
    except OSError as exc:
        if exc.errno in (errno.ENOENT, errno.ELOOP):
            return p
        raise
