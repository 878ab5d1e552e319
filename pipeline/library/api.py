"""The Python API for users of a curated library: load it, look a species up, evaluate it.

>>> import thermoledger
>>> lib = thermoledger.load_library("curated")          # doctest: +SKIP
>>> n2 = lib["N2(g)"]                                    # doctest: +SKIP
>>> n2.cp(1000.0)                                        # doctest: +SKIP

A ``Species`` carries its published form with its coefficients, so a 9-coefficient set can
never be evaluated as a 7-coefficient one. Every property takes a temperature in [K] as a
scalar, a sequence, a numpy array or a pint quantity (converted to kelvin, offsets
included) and returns a float for a scalar and an array of the same shape otherwise.
Temperatures outside the species' range of use raise InputError (a ValueError).

Importing this module loads numpy only: no pandas (until ``to_pandas``), matplotlib,
pyarrow, or POSIX-only module.
"""

from pathlib import Path

import numpy as np

from ..core.errors import InputError, SpeciesNotFound
from ..physics import forms
from . import document, reaction
from .entries import by_id as entries_by_id
from .formation import COLUMNS as FORMATION
from .formation import Formation
from .tables import species_rows, transitions_of


def _kelvin(temperature) -> tuple[np.ndarray, bool]:
    """(temperatures [K] as a float array, True when the input was a scalar)."""
    if type(temperature).__module__.split(".")[0] == "pint":
        temperature = temperature.to("kelvin").magnitude
    t = np.asarray(temperature, dtype=float)
    return t, t.ndim == 0


def _shaped(values: np.ndarray, shape: tuple, scalar: bool):
    out = np.asarray(values).reshape(shape)
    return float(out) if scalar else out


class Species:
    """One species of a curated library, evaluated from its stored coefficients.

    Properties take T [K]; ``cp`` and ``s`` return [J/(mol K)], ``h``, ``h_minus_h298`` and
    ``g`` return [J/mol]. H is on the assigned-enthalpy scale, H(298.15 K) = ΔfH°(298.15 K);
    S is at the standard pressure of 1 bar; G = H − T S.
    """

    def __init__(self, entry: dict, transitions=(), library: "Library | None" = None):
        self.entry = entry
        self._library = library
        self.transitions = tuple(x for x in transitions if entry["id"] in (x["from"], x["to"]))
        self.id: str = entry["id"]
        self.formula: str = entry["formula"]
        self.phase: str = entry["phase"]
        self.form: str = entry["form"]
        self.molar_mass: float = entry["molar_mass"]                          # [g/mol]
        # [J/mol] and [J/(mol K)]; None for a phase reached through transitions
        self.enthalpy_of_formation_298: float | None = entry["enthalpy_of_formation_298"]
        self.entropy_298: float | None = entry["entropy_298"]
        self.t_min: float = entry["ranges"][0]["t_min"]                      # [K]
        self.t_max: float = entry["ranges"][-1]["t_max"]                     # [K]
        self.data_range: tuple = (entry["data_range"]["t_min"], entry["data_range"]["t_max"])
        self.extrapolated_intervals: tuple = tuple(
            (e["t_min"], e["t_max"]) for e in entry["extrapolated"])
        #: for a species from a published coefficient set: its file, defects, whether it was
        #: repaired and (then) the published ranges and the largest change; None otherwise
        self.origin: dict | None = entry.get("origin")
        self._ranges = document.ranges_of(entry)
        self._h298 = None

    def __repr__(self) -> str:
        return f"<Species {self.id} {self.form} {self.t_min:g}-{self.t_max:g} K>"

    def _checked(self, temperature) -> tuple[np.ndarray, tuple, bool]:
        """(temperatures [K] flattened, their shape, scalar?) once inside the range of use."""
        t, scalar = _kelvin(temperature)
        flat = t.reshape(-1)
        document.check_range(self.entry, flat)
        return flat, t.shape, scalar

    def _values(self, temperature) -> tuple[dict, tuple, bool]:
        flat, shape, scalar = self._checked(temperature)
        return forms.evaluate_ranges(self._ranges, flat, self.form), shape, scalar

    def cp(self, temperature):
        """Isobaric heat capacity Cp [J/(mol K)] at T [K]."""
        v, shape, scalar = self._values(temperature)
        return _shaped(v["Cp"], shape, scalar)

    def h(self, temperature):
        """Enthalpy H [J/mol] on the assigned-enthalpy scale (H(298.15 K) = ΔfH°)."""
        v, shape, scalar = self._values(temperature)
        return _shaped(v["H"], shape, scalar)

    def h_minus_h298(self, temperature):
        """Enthalpy increment H(T) − H(298.15 K) [J/mol]."""
        v, shape, scalar = self._values(temperature)
        return _shaped(v["H"] - self.h298, shape, scalar)

    def s(self, temperature):
        """Entropy S° [J/(mol K)] at 1 bar."""
        v, shape, scalar = self._values(temperature)
        return _shaped(v["S"], shape, scalar)

    def g(self, temperature):
        """Gibbs energy G = H − T S [J/mol] on the assigned-enthalpy scale."""
        v, shape, scalar = self._values(temperature)
        return _shaped(v["G"], shape, scalar)

    @property
    def h298(self) -> float:
        """H(298.15 K) [J/mol] that H − H298 counts from: as the coefficients give it (equal
        to ΔfH° to round-off), or, for a phase reached through transitions, H(298.15 K) of
        the phase stable there."""
        if self._h298 is None:
            self._h298 = document.enthalpy_zero(self.entry)
        return self._h298

    def uncertainty(self, temperature) -> dict:
        """Standard uncertainties {'cp', 'h', 's'} at T [K]: u(Cp) [J/(mol K)], u(H) [J/mol]
        and u(S) [J/(mol K)] (H and S relative to their exact 298.15 K anchors), each shaped
        like ``temperature``."""
        flat, shape, scalar = self._checked(temperature)
        u = document.uncertainty(self.entry, flat)
        return {k: _shaped(u[key], shape, scalar)
                for k, key in (("cp", "u_Cp"), ("h", "u_H"), ("s", "u_S"))}

    def formation(self, temperature) -> dict:
        """Formation properties at T [K] from the elements in their reference states:
        {'dfH', 'u_dfH', 'dfG', 'u_dfG'} [J/mol] and {'log10Kf', 'u_log10Kf'}, each shaped
        like ``temperature`` (NaN where an element's reference species has no phase in
        range). InputError (a ValueError) when the species has none: an element without a
        reference species in the library, or a Species not taken from a Library."""
        flat, shape, scalar = self._checked(temperature)
        made = self._library.formation_of if self._library is not None else None
        got = made.at(self.id, flat) if made is not None else None
        if got is None:
            why = "; ".join(made.missing(self.id)) if made is not None else \
                "it was not taken from a Library"
            raise InputError(f"{self.id} has no formation properties: {why}",
                             expected="reference species for each of its elements")
        return {k: _shaped(got[k], shape, scalar) for k in FORMATION}

    def is_extrapolated(self, temperature):
        """True where T [K] lies outside the data the fit was made from."""
        t, scalar = _kelvin(temperature)
        lo, hi = self.data_range
        flag = (t < lo) | (t > hi)
        return bool(flag) if scalar else flag

    def table(self, temperatures=None, step: float = 100.0) -> dict:
        """The evaluated table as columns of arrays: at ``temperatures`` [K], or at 298.15 K
        and every ``step`` K over the range of use (see ``library.tables``)."""
        points = None if temperatures is None else self._checked(temperatures)[0]
        made = self._library.formation_of if self._library is not None else None
        return species_rows(self.entry, step, points, self.transitions, made)

    def to_pandas(self, temperatures=None, step: float = 100.0):
        """``table`` as a pandas DataFrame, one row per temperature."""
        import pandas as pd

        return pd.DataFrame(self.table(temperatures, step))


class Library:
    """A curated library: its species by id, and the build it came from.

    ``lib["N2(g)"]`` takes an id; ``lib["n2"]`` a name in any case when one phase has it;
    ``lib.get("CO2", phase="g")`` names the phase. A name that is missing or names several
    phases raises SpeciesNotFound (a KeyError) with the candidates.
    """

    def __init__(self, doc: dict, path: Path | None = None):
        self.document = doc
        self.path = path
        self.notice: str = doc.get("notice", "")
        self.build: dict = doc.get("build", {})
        self._entries = entries_by_id(doc)
        self._cache: dict = {}
        self._formation = None

    def __repr__(self) -> str:
        where = f" from {self.path}" if self.path else ""
        return f"<Library of {len(self)} species{where}>"

    def __len__(self) -> int:
        return len(self._entries)

    def __iter__(self):
        return iter(self.ids)

    def __contains__(self, name) -> bool:
        try:
            self._resolve(name, None)
        except SpeciesNotFound:
            return False
        return True

    @property
    def ids(self) -> list:
        """Every species id, sorted."""
        return sorted(self._entries)

    def __getitem__(self, name: str) -> Species:
        return self.get(name)

    def get(self, name: str, phase: str | None = None) -> Species:
        """The species named ``name`` (an id such as 'CO2(g)', or a formula name in any
        case), in ``phase`` when given."""
        sid = self._resolve(name, phase)
        if sid not in self._cache:
            self._cache[sid] = Species(self._entries[sid], self.document.get("transitions", ()),
                                       self)
        return self._cache[sid]

    def stable(self, name: str, temperature: float) -> Species:
        """The phase of ``name`` stable at ``temperature`` [K] when the library links its
        phases by transitions (the phase below at a transition temperature), else the one
        species ``name`` means."""
        t, _ = _kelvin(temperature)
        return self.get(document.phases_at(self.document, name, [float(t)])[0])

    @property
    def formation_of(self) -> Formation:
        """Formation properties of the library's species (library/formation.py)."""
        if self._formation is None:
            self._formation = Formation(self.document)
        return self._formation

    @property
    def reference_states(self) -> list:
        """The reference state of every element: {element, species, atoms, ids, origin,
        problem} (ids empty, and problem saying why, for an element without one)."""
        return [dict(s) for s in self.formation_of.states.values()]

    def reaction(self, equation: str, temperatures) -> dict:
        """ΔrH°, ΔrS°, ΔrG° and log10 K of a balanced ``equation`` (e.g. '2 CO + O2 = 2 CO2')
        at T [K]: arrays 'dH', 'u_dH' [J/mol], 'dS', 'u_dS' [J/(mol K)], 'dG', 'u_dG' [J/mol],
        'log10K', 'u_log10K', 'extrapolated', and 'ids' (the species id of each term at
        each T); see library/reaction.py. InputError for an unbalanced or unreadable
        equation, SpeciesNotFound for a missing species."""
        t, _ = _kelvin(temperatures)
        return reaction.evaluate(self.document, equation, t.reshape(-1),
                                 self.formation_of.budgets)

    def _resolve(self, name: str, phase: str | None) -> str:
        return document.resolve_id(self._entries, name, phase)

    def to_pandas(self, step: float = 100.0):
        """The evaluated tables of every species, one DataFrame (column 'id' names the
        species)."""
        import pandas as pd

        trs = transitions_of(self.document.get("transitions", ()))
        made = self.formation_of
        frames = [pd.DataFrame(species_rows(self._entries[i], step, None, trs.get(i, ()), made))
                  for i in self.ids]
        return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def load_library(path) -> Library:
    """The library in ``path``: a library.json file or a curated folder (its current
    release). InputError (a ValueError) names the file and what is wrong when it is not a
    library written by thermoledger."""

    doc = document.load(path)
    return Library(doc, Path(path))


__all__ = ["Library", "Species", "SpeciesNotFound", "load_library"]
