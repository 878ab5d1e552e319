"""Effective settings of the stages, with their defaults (one place, recorded in outputs)."""

from dataclasses import asdict, dataclass, fields


@dataclass(frozen=True)
class FitSettings:
    #: published form of the coefficients: nasa7, nasa9 or shomate (forms.FORMS)
    """Settings of the fitting stage, with their defaults."""

    form: str = "nasa7"
    #: number of temperature ranges (1 to 4)
    ranges: int = 2
    #: "optimise" (default), "conventional" (``breakpoint``, two ranges) or "fixed"
    breakpoint_mode: str = "optimise"
    #: conventional breakpoint [K]
    breakpoint: float = 1000.0
    #: breakpoints [K] for breakpoint_mode "fixed"
    fixed_breakpoints: tuple = ()
    #: what optimised breakpoints minimise: "rms" (default: one point cannot move the break
    #: far, so small data changes move it little) or "max" (largest weighted deviation)
    breakpoint_norm: str = "rms"
    #: allowed interval [K] for optimised breakpoints (None: anywhere inside the data)
    breakpoint_min: float | None = None
    breakpoint_max: float | None = None
    max_candidates: int = 80
    #: two optimised ranges keep the conventional breakpoint unless the optimum lowers the
    #: weighted sum of squares (chi2) of Cp by more than this (stable breakpoints)
    breakpoint_stability: float = 1.0
    #: every range spans at least this ratio T_max/T_min (narrow ranges get wild coefficients)
    min_range_ratio: float = 1.5
    #: continuity at breakpoints: 1 = Cp and dCp/dT, 2 = also d2Cp/dT2
    continuity: int = 1
    #: minimise the largest weighted Cp deviation instead of the sum of squares
    minimax: bool = False
    #: fit H-H298 and S columns together with Cp when a table has them
    simultaneous: bool = True
    #: relative standard uncertainty of Cp assumed when a table states none (common practice);
    #: the smoothness and column checks use the same value
    inferred_cp_uncertainty: float = 0.003
    #: assumed u(H-H298) = max(rel * |H-H298|, abs) [J/mol] and u(S) [J/(mol K)]
    h_uncertainty_rel: float = 1e-3
    h_uncertainty_abs: float = 10.0
    s_uncertainty_abs: float = 0.02
    #: fewest data points in each fitted range
    min_points_per_range: int = 5
    #: how far [K] the lowest range may be stretched below the data to reach 298.15 K
    max_anchor_extension: float = 100.0
    #: requested range of use [K] (None: the data range); beyond the data it is extrapolated
    use_t_min: float | None = None
    use_t_max: float | None = None
    #: extend ideal-gas Cp past the data with a physically shaped model before fitting
    extrapolate: bool = True
    #: extending the range of use may raise the largest relative Cp deviation inside the data
    #: by at most this much; beyond it the extrapolated interval gets a range of its own
    extension_tolerance: float = 0.0002
    #: acceptance (fit/acceptance.py): with u(Cp) stated, the false-rejection rate of each of
    #: the chi-square test and the per-point bound; without, the largest relative deviation.
    #: A fit beyond these, or beyond the H and S bounds, is reported (FIT-REJECTED)
    accept_alpha: float = 0.001
    accept_cp_max_rel: float = 0.01
    accept_h_max: float = 500.0
    accept_s_max: float = 0.5

    @property
    def min_points(self) -> int:
        """Fewest data points the requested ranges need."""
        return self.ranges * self.min_points_per_range

    def to_dict(self) -> dict:
        """The settings as plain JSON values (recorded in the library and the manifest).
        Every field but fixed_breakpoints holds a plain value, so the fields are read as
        they are (dataclasses.asdict would copy each deeply: every species records them)."""
        out = {name: getattr(self, name) for name in _FIT_FIELDS}
        out["fixed_breakpoints"] = list(self.fixed_breakpoints)
        return out

    def recorded(self) -> dict:
        """``to_dict``, one dict for all settings that are written alike (records.alike: 6000
        and 6000.0 are equal settings but not the same JSON): every fitted species records
        its settings, some 3 KB each. Read only: never change it. Made once per settings
        object (kept beside its fields: equal settings need not be written alike)."""
        got = self.__dict__.get("_recorded")
        if got is None:
            from .records import alike  # here: reading the settings loads no numpy

            got = alike(self.to_dict())
            object.__setattr__(self, "_recorded", got)
        return got


_FIT_FIELDS = tuple(f.name for f in fields(FitSettings))


@dataclass(frozen=True)
class CheckSettings:
    """Tolerances of the validation checks (relative values are fractions)."""

    #: Cp below 5/2 R by more than this fraction is an error
    equipartition_tolerance: float = 0.005
    #: Cp above the classical limit Cp(inf) by more than this fraction is a warning
    classical_margin: float = 0.10
    #: ideal gas: Cp above this multiple of Cp(inf), and at least implausible_excess R above
    #: it, is an error (no anharmonic or electronic contribution reaches it; common practice)
    implausible_factor: float = 2.0
    implausible_excess: float = 10.0
    #: monatomic gas: Cp above 5/2 R by more than this (electronic states) is a warning [R units]
    monatomic_excess: float = 1.5
    #: crystal: Cp above this multiple of 3R per atom is a warning (anharmonicity, vacancies
    #: and conduction electrons take metals near melting to about 1.3-1.4; common practice)
    dulong_petit_factor: float = 1.5
    #: a point is an outlier beyond this many robust standard deviations ...
    outlier_sigmas: float = 6.0
    #: ... and beyond this relative deviation from its neighbours' smooth curve
    outlier_floor: float = 0.004
    #: two sources disagreeing by more than this fraction is a warning
    source_tolerance: float = 0.01
    #: a factor is recognised when the log-ratio is within this of its logarithm
    factor_tolerance: float = 0.03
    #: the tight band of an ideal gas, used to choose between unit factors, starts this
    #: fraction below Cp(0) (rotation excited, vibrations frozen; common practice)
    rotor_band_margin: float = 0.03
    #: ideal gas with rotation excited: Cp below Cp(0) (7/2 R, 4 R) by more than this
    #: fraction is an error (normal hydrogen at 5 θ_rot is 0.5 % below; common practice)
    rotor_floor_margin: float = 0.02
    #: S°(T) below its translational + rotational floor by more than this [J/(mol K)] is an
    #: error (the trapezoidal integral and rounded anchors stay well inside; common practice)
    entropy_floor_margin: float = 2.0
    #: a gap between consecutive points is ungrounded beyond this ratio T2/T1 and this width [K]
    gap_ratio: float = 1.5
    gap_width: float = 250.0
    #: standard uncertainty assumed for a formation property a source states [J/mol] (its
    #: rounding and the revisions between compilations; common practice); a stated value
    #: beyond twice the combined uncertainty from the library's is FORM-DISAGREE
    stated_formation_u: float = 500.0
    #: published coefficient sets (checks/coefsets.py): a step at a breakpoint is an error
    #: beyond both thresholds of a quantity, relative to its scale (Cp: Cp; H: R T; S: R)
    #: and absolute [J/(mol K), J/mol]; one a tenth as large still exceeds common practice for
    #: the continuity that programs loading a reaction mechanism demand (a warning)
    set_step_rel: float = 1e-3
    set_step_cp_abs: float = 0.01
    set_step_h_abs: float = 1.0
    set_step_s_abs: float = 0.01
    set_strict_factor: float = 0.1
    #: a step of dCp/dT at a breakpoint beyond this fraction of Cp/T is a warning (published
    #: sets are fitted with Cp, H and S continuous; their slopes differ by up to ~4 %)
    set_kink_rel: float = 0.1

    def to_dict(self) -> dict:
        """The settings as plain JSON values (recorded in the library and the manifest)."""
        return asdict(self)


@dataclass(frozen=True)
class OutputSettings:
    """What the export stage writes besides the library."""

    #: the HTML build report in report/
    report: bool = True
    #: one CSV of evaluated properties per species in tables/ (tables.parquet is always written)
    tables_csv: bool = False
    #: temperature step [K] of the evaluated tables (after 298.15 K)
    table_step: float = 100.0

    def to_dict(self) -> dict:
        """The settings as plain JSON values (recorded in the library and the manifest)."""
        return asdict(self)


@dataclass(frozen=True)
class Settings:
    """All stage settings of one build."""

    fit: FitSettings = FitSettings()
    checks: CheckSettings = CheckSettings()
    outputs: OutputSettings = OutputSettings()
    #: reference states of elements chosen for this build, over the sources' and the
    #: defaults: ((element, species name or id), ...) sorted (core/elements.py)
    references: tuple = ()
    #: published coefficient sets to repair when defects are found: species names or ids,
    #: source ids, or "all" (besides those source.json asks for), sorted
    repair: tuple = ()

    def to_dict(self) -> dict:
        """The settings as plain JSON values (recorded in the library and the manifest)."""
        return {"fit": self.fit.to_dict(), "checks": self.checks.to_dict(),
                "outputs": self.outputs.to_dict(), "references": dict(self.references),
                "repair": list(self.repair)}

    def repairs(self, meta) -> bool:
        """True when the published coefficient set of table ``meta`` is to be repaired if
        defective: its source.json asks, or ``repair`` names it, its species or its source."""
        if meta.published is None:
            return False
        names = {"all", meta.species, meta.species_id, meta.source.id}
        return meta.published.repair or bool(names & set(self.repair))

    @classmethod
    def from_dict(cls, d: dict) -> "Settings":
        """The settings recorded by ``to_dict`` (a release's manifest); settings this version
        does not record keep their defaults. ValueError names a setting it does not know."""
        parts = {}
        for key, kind in (("fit", FitSettings), ("checks", CheckSettings),
                          ("outputs", OutputSettings)):
            given = dict(d.get(key) or {})
            unknown = sorted(set(given) - {f.name for f in fields(kind)})
            if unknown:
                raise ValueError(f"unknown setting(s) {key}.{', '.join(unknown)}")
            if "fixed_breakpoints" in given:
                given["fixed_breakpoints"] = tuple(given["fixed_breakpoints"])
            parts[key] = kind(**given)
        return cls(**parts, references=tuple(sorted((d.get("references") or {}).items())),
                   repair=tuple(sorted(d.get("repair") or ())))


def for_table(fit: FitSettings, overrides) -> FitSettings:
    """``fit`` with a table's own overrides (source.json "fit": form, ranges, breakpoints,
    continuity, minimax, use_t_min, use_t_max) applied."""

    from dataclasses import replace

    over = dict(overrides)
    if not over:
        return fit
    if "breakpoints" in over:
        bp = over.pop("breakpoints")
        if isinstance(bp, (list, tuple)):
            over["breakpoint_mode"], over["fixed_breakpoints"] = "fixed", tuple(bp)
            over.setdefault("ranges", len(bp) + 1)
        else:
            over["breakpoint_mode"] = bp
    return replace(fit, **over)
