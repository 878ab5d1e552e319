"""Frozen records passed between stages.

Table data travel as ``Rows`` (core/rows.py: named numpy columns) with these columns (SI units):

==========  ==============  =================================================
column      unit            meaning
==========  ==============  =================================================
line        -               line number in the raw CSV (the header is line 1)
T           [K]             temperature
Cp          [J/(mol K)]     isobaric heat capacity
u_Cp        [J/(mol K)]     standard uncertainty of Cp (NaN when not given)
dH          [J/mol]         H(T) - H(298.15 K) (NaN when not given)
S           [J/(mol K)]     entropy at the standard pressure, 1 bar (NaN when not given)
u_dH        [J/mol]         standard uncertainty of dH (NaN when not given)
u_S         [J/(mol K)]     standard uncertainty of S (NaN when not given)
gef         [J/(mol K)]     Gibbs energy function -(G - H298)/T (NaN when not given)
==========  ==============  =================================================

Cp is NaN on every row of an enthalpy-increment table until ingest derives it from H − H298
(ingest/increments.py).
"""

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from .rows import Rows
from .slotstate import quick_state

#: the values ``alike`` hands out, by type and repr
_ALIKE = {}
ALIKE_REMEMBERED = 4096


def alike(value):
    """``value``, or the first value given before that is written alike (the same type and
    repr: 6000 and 6000.0 are equal but not the same JSON), so that equal records share one
    object. Many species record the same fit settings and the tables of a source are
    mostly read the same way, and a large build keeps every species until its release is
    written. Read only: never change what it returns."""
    key = (type(value), repr(value))
    if len(_ALIKE) >= ALIKE_REMEMBERED:
        _ALIKE.clear()
    return _ALIKE.setdefault(key, value)


DATA_COLUMNS = ("line", "T", "Cp", "u_Cp", "dH", "S", "u_dH", "u_S", "gef")


def valid_columns(data: Rows) -> Rows:
    """The rows of a table whose T [K] and Cp [J/(mol K)] are finite and positive, sorted by
    T (stable, so equal temperatures keep their file order)."""
    t, cp = data["T"], data["Cp"]
    good = np.isfinite(t) & np.isfinite(cp) & (t > 0) & (cp > 0)
    if good.all() and (t[1:] >= t[:-1]).all():
        return data                  # all valid and sorted already: the same rows
    ok = good.nonzero()[0]
    return data.take(ok[t[ok].argsort(kind="stable")])


def first_of_each_t(rows: Rows) -> Rows:
    """The first row of each temperature of T-sorted ``rows`` (the first of each run of
    equal T)."""
    t = rows["T"]
    again = t[1:] == t[:-1]
    return rows.take(np.concatenate(([True], ~again))) if again.any() else rows


def given(rows: Rows, column: str, *, every: bool = False):
    """``rows[column]`` as an array when any value is given (all, with ``every``), else None."""
    if not len(rows):
        return None
    values = np.asarray(rows[column], dtype=float)
    present = ~np.isnan(values)
    if not (present.all() if every else present.any()):
        return None
    return values


@dataclass(frozen=True)
class SourceMeta:
    """One source as declared in its source.json."""

    id: str                # source id, as declared in source.json "source"
    folder: str            # folder name under raw/
    title: str
    citation: str
    method: str
    license: str
    priority: int
    standard_pressure: float  # [Pa] of the source's tabulated entropies
    sha256: str            # of source.json
    references: tuple = ()  # ((element, species name or id), ...): its "reference_states"


@dataclass(frozen=True)
class PublishedSet:
    """A coefficient set as a source publishes it (ingest/coefsets.py): its form and its
    ranges exactly as written, with the CSV line of each range."""

    form: str              # nasa7, nasa9 or shomate (physics/forms.py)
    ranges: tuple          # ((t_min [K], t_max [K], coefficients tuple), ...) in file order
    lines: tuple           # CSV line of each range
    repair: bool = False   # source.json asks for a continuous refit when defects are found
    keep_breakpoints: bool = True  # a repair keeps the set's breakpoints

    @property
    def ordered(self) -> tuple:
        """(t_min, t_max, coefficients, line) of each range, ascending in T."""
        rows = ((t_min, t_max, c, line) for (t_min, t_max, c), line in zip(self.ranges, self.lines))
        return tuple(sorted(rows, key=lambda r: (r[0], r[1])))

    @property
    def breakpoints(self) -> tuple:
        """[K] where one range hands over to the next (the upper end of each but the last)."""
        return tuple(r[1] for r in self.ordered[:-1])


@quick_state
@dataclass(frozen=True, slots=True)
class TableMeta:
    """One table as listed in source.json, with what ingest learnt while reading it."""

    source: SourceMeta
    file: str              # path relative to raw/, with '/' separators
    species: str
    formula: str
    phase: str             # g, l, cr or cr-<form> (core/phases.py)
    geometry: str | None   # monatomic, linear, nonlinear (ideal gases)
    molar_mass: float | None  # [g/mol]
    atoms: int | None
    enthalpy_of_formation_298: float | None  # [J/mol]; None: reached through transitions
    entropy_298: float | None  # [J/(mol K)] at 1 bar; None: reached through transitions
    sha256: str            # of the raw CSV bytes
    size: int              # [bytes]
    columns: tuple = ()    # raw header cells as written
    notes: tuple = ()      # conversions and assumptions made while reading
    acknowledgements: tuple = ()  # ({'code', 'line', 'reason'} dicts, index in source.json)
    index: int = 0         # position of the table in source.json 'tables'
    fit_overrides: tuple = ()  # ((setting, value), ...) from the table's "fit" entry
    reached: bool = False  # H and S reach this phase through a transition (checks/transitions)
    derived: tuple = ()    # columns ingest derived from others, e.g. ('Cp',) from H - H298
    shared: bool = False   # one phase of a file that holds several (a phase column)
    u_enthalpy_of_formation_298: float | None = None  # [J/mol], when source.json states it
    u_entropy_298: float | None = None  # [J/(mol K)], when source.json states it
    #: formation properties the source states: ((T [K], 'enthalpy' | 'gibbs_energy' |
    #: 'log10_kf', value [J/mol or -], index in "stated_formation"), ...)
    stated_formation: tuple = ()
    published: PublishedSet | None = None  # the table is a published coefficient set, evaluated
    reading: dict = field(default_factory=dict, compare=False, hash=False)  # how it was read

    @property
    def species_id(self) -> str:
        """The id of the species in the library, e.g. 'CO2(g)'."""
        return f"{self.species}({self.phase})"

    @property
    def anchored(self) -> bool:
        """True when source.json gives this table's own ΔfH° and S° at 298.15 K."""
        return self.enthalpy_of_formation_298 is not None and self.entropy_298 is not None

    @property
    def where(self) -> dict:
        """The fields that locate a finding about this table: its source id and file."""
        return dict(source=self.source.id, file=self.file)


@dataclass(frozen=True)
class Table:
    """A table read into SI units: its metadata and its rows (the documented columns)."""

    meta: TableMeta
    data: Rows = field(compare=False)

    @cached_property
    def valid(self) -> Rows:
        """The valid rows of ``data`` sorted by T (``valid_columns``), computed once: most
        checks read them."""
        return valid_columns(self.data)

    def forget_valid(self) -> None:
        """Drop the cached ``valid`` rows once the checks are done (they would double the
        memory of a large build)."""
        self.__dict__.pop("valid", None)


@dataclass(frozen=True)
class Transition:
    """A phase transition of a species at the standard pressure, as a source states it."""

    species: str           # the species name, e.g. 'Fe'
    lower: str             # phase stable below the temperature, e.g. 'cr-alpha'
    upper: str             # phase stable above it, e.g. 'cr-gamma'
    temperature: float     # [K]
    enthalpy: float        # [J/mol], H(upper) - H(lower) at the temperature, on heating
    u_enthalpy: float | None  # [J/mol], standard uncertainty when stated
    source: SourceMeta
    index: int             # position in source.json 'transitions'

    @property
    def lower_id(self) -> str:
        return f"{self.species}({self.lower})"

    @property
    def upper_id(self) -> str:
        return f"{self.species}({self.upper})"

    @property
    def entropy(self) -> float:
        """ΔS_trs = ΔH_trs / T_trs [J/(mol K)]: G is continuous at the transition."""
        return self.enthalpy / self.temperature

    @property
    def where(self) -> dict:
        """The fields that locate a finding about this transition in its source.json."""
        return dict(source=self.source.id, file=f"{self.source.folder}/source.json",
                    column=f"transitions/{self.index}")


@dataclass(frozen=True)
class Chain:
    """The phases of one species in the order they are stable on heating, linked by
    transitions, with the phase whose anchors start the chain."""

    species: str           # the species name, e.g. 'Fe'
    phases: tuple          # phase labels, stable one after the other on heating
    transitions: tuple     # Transition between consecutive phases (len(phases) - 1)
    root: str              # the phase anchored at 298.15 K that H and S start from
    own: tuple             # phases fitted with their own anchors (the root among them)

    def id_of(self, phase: str) -> str:
        """The species id of ``phase`` of this species, e.g. 'Ti(cr-beta)'."""
        return f"{self.species}({phase})"

    def ids(self) -> tuple:
        """The species ids of the phases, in order."""
        return tuple(self.id_of(p) for p in self.phases)

    def stable_ranges(self, t_min: float, t_max: float) -> dict:
        """{phase: (T_lo, T_hi) [K]} where each phase is the stable one, the first from
        ``t_min`` and the last up to ``t_max``."""
        temps = [t_min] + [x.temperature for x in self.transitions] + [t_max]
        return {p: (temps[k], temps[k + 1]) for k, p in enumerate(self.phases)}


@dataclass(frozen=True)
class SpeciesIdentity:
    """Who is being fitted: the identity and anchors the fit needs besides the data.

    H and S are anchored at ``anchor_t``: 298.15 K with ΔfH° and S° for a phase with its
    own anchors, or a transition temperature with the values the neighbouring phase and
    the transition give. ``h_reference`` is the zero of the H − H298 column: H(298.15 K) of
    the phase stable there. ``span`` holds temperatures [K] the range of use must reach
    (the phase's transitions)."""

    species_id: str                        # e.g. 'CO2(g)'
    enthalpy_of_formation_298: float | None  # [J/mol], H(298.15 K) on the assigned scale
    entropy_298: float | None              # [J/(mol K)] at 1 bar
    phase: str = "g"                       # g, l, cr or cr-<form>
    geometry: str | None = None            # monatomic, linear, nonlinear (ideal gases)
    atoms: int | None = None               # atoms in one molecule
    anchor_t: float = 298.15               # [K] where H and S are anchored
    anchor_h: float | None = None          # [J/mol] H at anchor_t (None: ΔfH°)
    anchor_s: float | None = None          # [J/(mol K)] S at anchor_t (None: S°)
    h_reference: float | None = None       # [J/mol] zero of H - H298 (None: ΔfH°)
    span: tuple = ()                       # [K] temperatures the range of use must reach

    @classmethod
    def of_table(cls, meta: "TableMeta") -> "SpeciesIdentity":
        """The identity and anchors of the species of table metadata ``meta``."""
        return cls(meta.species_id, meta.enthalpy_of_formation_298, meta.entropy_298,
                   meta.phase, meta.geometry, meta.atoms)

    @property
    def anchor(self) -> tuple:
        """(T [K], H [J/mol], S [J/(mol K)]) where H and S are fixed."""
        h = self.enthalpy_of_formation_298 if self.anchor_h is None else self.anchor_h
        s = self.entropy_298 if self.anchor_s is None else self.anchor_s
        return self.anchor_t, h, s

    @property
    def reference_h(self) -> float:
        """H(298.15 K) [J/mol] that H − H298 is counted from."""
        return self.enthalpy_of_formation_298 if self.h_reference is None else self.h_reference


@dataclass(frozen=True)
class CpData:
    """The rows one fit uses, as arrays sorted by T; optional columns are None or hold NaN
    where a row has no value."""

    t: np.ndarray                  # [K]
    cp: np.ndarray                 # [J/(mol K)]
    u_cp: np.ndarray | None = None  # [J/(mol K)], stated standard uncertainty of Cp
    dh: np.ndarray | None = None    # [J/mol], H(T) - H(298.15 K)
    s: np.ndarray | None = None     # [J/(mol K)] at 1 bar
    u_dh: np.ndarray | None = None  # [J/mol]
    u_s: np.ndarray | None = None   # [J/(mol K)]

    def __post_init__(self):
        t = np.asarray(self.t, dtype=float)
        order = t.argsort(kind="stable")
        object.__setattr__(self, "t", t[order])
        for name in ("cp", "u_cp", "dh", "s", "u_dh", "u_s"):
            v = getattr(self, name)
            if v is not None:
                object.__setattr__(self, name, np.asarray(v, dtype=float)[order])

    @classmethod
    def of_rows(cls, rows: Rows) -> "CpData":
        """From table rows with the documented columns; u(Cp) only when every row has it."""
        return cls(t=np.asarray(rows["T"], dtype=float), cp=np.asarray(rows["Cp"], dtype=float),
                   u_cp=given(rows, "u_Cp", every=True), dh=given(rows, "dH"),
                   s=given(rows, "S"), u_dh=given(rows, "u_dH"), u_s=given(rows, "u_S"))


@quick_state
@dataclass(frozen=True, slots=True)
class InputFile:
    """One raw input file: its path under raw/, sha256 and size."""

    path: str    # relative to raw/
    sha256: str
    size: int    # [bytes]


@dataclass(frozen=True)
class FitRange:
    """One temperature range [K] of a fit with its coefficients in the published form."""

    t_min: float           # [K]
    t_max: float           # [K]
    coefficients: tuple    # published kelvin form, see forms.py


@dataclass(frozen=True)
class FitResult:
    """What a fit returns: exactly what the evaluator takes, plus its quality and settings."""

    form: str
    ranges: tuple          # of FitRange, ascending in T
    breakpoints: tuple     # [K]
    data_t_min: float      # [K]
    data_t_max: float      # [K]
    points: int            # data points used (extension points not counted)
    cp_max_rel_dev: float
    cp_rms_rel_dev: float
    worst_t: float         # [K] where |relative Cp deviation| is largest
    weighting: str         # "u(Cp)" or "relative"
    h_max_dev: float | None = None   # [J/mol] against the H-H298 column, when given
    s_max_dev: float | None = None   # [J/(mol K)] against the S column, when given
    covariance: tuple = ()  # of the scaled Cp/R coefficients, all ranges stacked
    model_error: tuple = ()  # per range: {"cp", "h", "s"} standard uncertainties of the form
    birge_ratio: float | None = None  # sqrt(chi2 / dof) of the weighted residuals
    covariance_scale: float | None = None  # the factor the covariance was multiplied by
    acceptance: dict = field(default_factory=dict, compare=False)  # rule and its statistics
    breakpoint_choice: dict | None = field(default=None, compare=False)  # breakchoice.Choice
    powers: tuple = ()      # powers of tau = T/1000 K of the scaled basis
    extrapolated: tuple = ()  # dicts: t_min, t_max, model, holdout_error, u_rel_end
    settings: dict = field(default_factory=dict, compare=False)
    notes: tuple = ()      # (code, message) of decisions the fit made
    #: for a species from a published coefficient set: where it came from, the defects
    #: found and, when repaired, the published ranges and the largest change (fit/published.py)
    origin: dict = field(default_factory=dict, compare=False)


@dataclass(frozen=True)
class CheckResult:
    """What ingest, validation and reconciliation found (the ``check`` command's result)."""

    tables: tuple          # every Table read
    findings: tuple        # all findings of ingest, validation and reconciliation
    inputs: tuple          # InputFile
    selections: tuple      # checks.reconcile.Selection per species
    quarantined: tuple     # (TableMeta, error findings)
    held_back: tuple = ()  # (file, error findings): sources and tables that could not be read
    chains: tuple = ()     # Chain of every species whose phases are linked by transitions
    references: tuple = ()  # ((element, species name or id, origin), ...) declared


@dataclass(frozen=True)
class FittedSpecies:
    """A fitted species with its table, findings and lineage (rows used and left out)."""

    table: Table                   # the preferred table (metadata and anchors)
    fit: FitResult
    findings: tuple = ()           # warnings and infos that travel with the species
    uses: tuple = ()               # reconcile.SourceUse of every table considered
    excluded: tuple = ()           # (file, line, code) of rows left out of the fit
    rows: tuple = ()               # (file, lines) of the data rows that entered the fit:
    #                                each file once, files and lines ascending, the lines
    #                                an array.array of 8-byte integers (build.rows_used)
    anchor: dict = field(default_factory=dict, compare=False)  # where H and S were fixed
