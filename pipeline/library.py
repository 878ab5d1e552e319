"""Read a curated library and evaluate its species (the consumer side of export)."""

import json
from pathlib import Path

import numpy as np

from . import forms
from .errors import InputError


def load(path) -> dict:
    """library.json from a file or a curated folder; InputError with a clear message otherwise."""
    p = Path(path)
    if p.is_dir():
        p = p / "library.json"
    if not p.is_file():
        raise InputError(f"no library at {p}", expected="a library.json file or a curated folder")
    try:
        doc = json.loads(p.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"{p} is not a JSON library ({exc})") from None
    if not isinstance(doc, dict) or doc.get("library_format") != 1:
        raise InputError(f"{p} is not a thermoledger library", expected="library_format 1")
    return doc


def find_species(doc: dict, name: str) -> dict:
    """Species by id ('CO2(g)') or by name when only one phase has it ('CO2')."""
    by_id = {s["id"]: s for s in doc["species"]}
    if name in by_id:
        return by_id[name]
    matches = [s for s in doc["species"] if s["id"].rsplit("(", 1)[0] == name]
    if len(matches) == 1:
        return matches[0]
    known = ", ".join(sorted(by_id)) or "(none)"
    if matches:
        raise InputError(f"species '{name}' is ambiguous",
                         expected="one of " + ", ".join(s["id"] for s in matches))
    raise InputError(f"species '{name}' is not in the library", expected=f"one of {known}")


def ranges_of(species: dict):
    return [(r["t_min"], r["t_max"], r["coefficients"]) for r in species["ranges"]]


def evaluate(species: dict, temperatures) -> dict:
    """Cp, H, S, G at ``temperatures`` [K]; raises InputError outside the range of use."""
    t = np.atleast_1d(np.asarray(temperatures, dtype=float))
    lo, hi = species["ranges"][0]["t_min"], species["ranges"][-1]["t_max"]
    bad = t[(t < lo) | (t > hi) | ~np.isfinite(t)]
    if len(bad):
        raise InputError(f"T = {bad[0]:g} K is outside the range of use of {species['id']}",
                         expected=f"{lo:g} K <= T <= {hi:g} K")
    out = forms.evaluate(ranges_of(species), t)
    out["extrapolated"] = np.array([any(e["t_min"] <= x <= e["t_max"]
                                        for e in species["extrapolated"]) for x in t])
    return out
