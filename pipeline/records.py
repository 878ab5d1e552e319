"""Frozen records passed between stages.

Table data travel as a pandas DataFrame with these columns (SI units):

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
==========  ==============  =================================================
"""

from dataclasses import dataclass, field

import pandas as pd

DATA_COLUMNS = ("line", "T", "Cp", "u_Cp", "dH", "S", "u_dH", "u_S")


@dataclass(frozen=True)
class SourceMeta:
    source: str            # source id
    folder: str            # folder name under raw/
    title: str
    citation: str
    method: str
    license: str
    priority: int
    standard_pressure: float  # [Pa] of the source's tabulated entropies
    sha256: str            # of source.json


@dataclass(frozen=True)
class TableMeta:
    source: SourceMeta
    file: str              # path relative to raw/, with '/' separators
    species: str
    formula: str
    phase: str             # g, l or cr
    geometry: str | None   # monatomic, linear, nonlinear (ideal gases)
    molar_mass: float | None  # [g/mol]
    atoms: int | None
    enthalpy_of_formation_298: float | None  # [J/mol]
    entropy_298: float | None  # [J/(mol K)] at 1 bar
    sha256: str            # of the raw CSV bytes
    size: int              # [bytes]
    columns: tuple = ()    # raw header cells as written
    notes: tuple = ()      # conversions and assumptions made while reading
    acknowledgements: tuple = ()  # ({'code', 'line', 'reason'} dicts, index in source.json)
    index: int = 0         # position of the table in source.json 'tables'
    fit_overrides: tuple = ()  # ((setting, value), ...) from the table's "fit" entry

    @property
    def species_id(self) -> str:
        return f"{self.species}({self.phase})"


@dataclass(frozen=True)
class Table:
    meta: TableMeta
    data: pd.DataFrame = field(compare=False)


@dataclass(frozen=True)
class InputFile:
    path: str    # relative to raw/
    sha256: str
    size: int    # [bytes]


@dataclass(frozen=True)
class FitRange:
    t_min: float           # [K]
    t_max: float           # [K]
    coefficients: tuple    # published kelvin form, see forms.py


@dataclass(frozen=True)
class FitResult:
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
    powers: tuple = ()      # powers of tau = T/1000 K of the scaled basis
    extrapolated: tuple = ()  # dicts: t_min, t_max, model, holdout_error, u_rel_end
    settings: dict = field(default_factory=dict, compare=False)
    notes: tuple = ()      # (code, message) of decisions the fit made


@dataclass(frozen=True)
class FittedSpecies:
    table: Table                   # the preferred table (metadata and anchors)
    fit: FitResult
    findings: tuple = ()           # warnings and infos that travel with the species
    uses: tuple = ()               # reconcile.SourceUse of every table considered
    excluded: tuple = ()           # (file, line, code) of rows left out of the fit
    rows: tuple = ()               # (file, line) of every data row that entered the fit
