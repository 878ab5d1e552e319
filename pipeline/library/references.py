"""Reference states of the elements in a library (core/elements.py states the convention).

``resolve`` turns the declared choices (defaults, source.json, settings) into the species
ids each element counts from: one entry, or the phases of one species linked by transitions
(the stable phase at each temperature). The library records the result as
'reference_states'; an element whose reference species is missing or unusable is recorded
with no ids and the reason, and species containing it get no formation properties.
"""

from functools import lru_cache

from ..core import chemistry
from ..core.elements import default_reference
from ..core.limits import REFERENCE_H_TOLERANCE
from ..core.names import species_name
from . import document
from .entries import by_id as entries_by_id
from .entries import formulas_of


def elements_of(formula: str) -> tuple:
    """((symbol, count), ...) of a formula, electrons of a charged species left out."""
    return tuple((e, n) for e, n in chemistry.composition(formula).elements if e != "e-")


@lru_cache(maxsize=4096)
def charge_of(formula: str) -> int:
    """The charge of a formula such as 'OH-' or '[SO4]2-' (0 for a neutral one); remembered
    per formula (every species is asked twice per build)."""
    import molmass

    return int(molmass.Formula(formula).charge)


def resolve(doc: dict, declared: dict | None = None) -> list:
    """The 'reference_states' of library ``doc``: for every element of its species, {element,
    species, atoms (of the element in one formula unit), ids (in order on heating), origin,
    problem (why there is none, else None)}. ``declared`` maps elements to (species name or
    id, origin); the default reference (core/elements.py) fills the rest."""
    declared = declared or {}
    by_id = entries_by_id(doc)
    elements = sorted({e for f in formulas_of(doc).values() for e, _ in elements_of(f)}
                      | set(declared))
    out = []
    for el in elements:
        name, origin = declared.get(el) or (default_reference(el), "default")
        ids, atoms, problem = _ids(doc, by_id, el, name)
        out.append({"element": el, "species": name, "atoms": atoms, "ids": ids,
                    "origin": origin, "problem": problem})
    return out


def _ids(doc, by_id, el, name) -> tuple:
    """(ids, atoms, problem) of reference species ``name`` of element ``el``."""
    if name.endswith(")") and "(" in name:
        ids = [name] if name in by_id else []
    else:
        ids = sorted(i for i in by_id if species_name(i) == name)
        if len(ids) > 1:
            links, chain = document.chain(doc.get("transitions", []), name)
            if not set(ids) <= set(chain):
                return [], None, (f"{name} has several phases ({', '.join(ids)}) that no "
                                  "transitions link; name one, e.g. "
                                  f"\"{el}\": \"{ids[0]}\"")
            ids = list(chain)
    if not ids:
        return [], None, f"no species {name} in the library"
    counts = {elements_of(by_id[i]["formula"]) for i in ids}
    if len(counts) != 1 or len(next(iter(counts))) != 1 or next(iter(counts))[0][0] != el:
        return [], None, f"{name} is not made of {el} alone ({by_id[ids[0]]['formula']})"
    atoms = next(iter(counts))[0][1]
    root = [i for i in ids if not by_id[i].get("anchor") or
            by_id[i]["anchor"].get("basis") == "own"]
    for i in root:
        h = by_id[i]["enthalpy_of_formation_298"]
        if abs(h) > REFERENCE_H_TOLERANCE:
            return [], None, (f"{i} has ΔfH°(298.15 K) = {h / 1000:.6g} kJ/mol; an element's "
                              "reference state has 0 by definition")
    return ids, atoms, None


def stable_ids(doc: dict, state: dict, t) -> list:
    """For each T [K], the id of ``state``'s reference species stable there, or None where
    none of its phases is (outside their ranges of use)."""
    by_id = entries_by_id(doc)
    ids = state["ids"]
    links = [x for x in doc.get("transitions", []) if x["from"] in ids and x["to"] in ids]
    links = sorted(links, key=lambda x: ids.index(x["from"]))
    k = document.stable_index(document.chain_edges(by_id, links, ids), t)
    return [ids[j] if j >= 0 else None for j in k]
