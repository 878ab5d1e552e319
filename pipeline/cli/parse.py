"""Command-line parsing: the commands, their options, and the Settings they give."""

import argparse
import math
from pathlib import Path

from .. import __version__
from ..core.errors import InputError
from ..core.limits import TEMPERATURE_SETTING_RANGE
from ..core.settings import FitSettings, OutputSettings, Settings
from ..physics import forms


def number(lo: float, hi: float, *, what: str, open_low: bool = False):
    """An argparse type: a finite number in [lo, hi] (or (lo, hi] with ``open_low``)."""
    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"'{text}' is not a number ({what})") from None
        low_ok = value > lo if open_low else value >= lo
        if not (math.isfinite(value) and low_ok and value <= hi):
            bracket = "(" if open_low else "["
            raise argparse.ArgumentTypeError(f"{text} is outside {bracket}{lo:g}, {hi:g}] "
                                             f"({what})")
        return value
    return parse


def whole(lo: int, hi: int, *, what: str):
    """An argparse type: a whole number in [lo, hi]."""
    def parse(text: str) -> int:
        if not text.strip().isdigit() or not lo <= int(text) <= hi:
            raise argparse.ArgumentTypeError(f"'{text}' is not a whole number from {lo} to "
                                             f"{hi} ({what})")
        return int(text)
    return parse


_T_LO, _T_HI = TEMPERATURE_SETTING_RANGE
temperature = number(_T_LO, _T_HI, what="a temperature in K")


def _workers_option(p) -> None:
    p.add_argument("--workers", type=whole(0, 64, what="a number of processes"), default=0,
                   metavar="N",
                   help="processes that read, check and fit the species partitions; 0 (the "
                        "default) chooses one per core, at most 4, for a build of 400 or more "
                        "tables and one otherwise; the outputs do not depend on it")


def parser() -> argparse.ArgumentParser:
    """The parser of every command."""
    p = argparse.ArgumentParser(
        prog="thermoledger",
        description="Curate heat-capacity tables (raw/) into a fitted coefficient library "
                    "(curated/).")
    p.add_argument("--version", action="version", version=f"thermoledger {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    b = sub.add_parser("build", help="read raw/, validate, fit, write curated/",
                       description="Read every source under --raw, validate its tables, fit "
                                   "nasa7 coefficients and write library.json, library.parquet "
                                   "and findings.json into --out.")
    b.add_argument("--raw", type=Path, default=Path("raw"), help="raw sources folder (raw)")
    b.add_argument("--out", type=Path, default=Path("curated"), help="output folder (curated)")
    b.add_argument("--strict", action="store_true",
                   help="exit 1 if any table was quarantined (for maintainers' CI)")
    b.add_argument("--wait", type=number(0, 86400, what="seconds"), default=0.0, metavar="SECONDS",
                   help="wait this long for another build writing the same folder (0)")
    b.add_argument("--quiet", action="store_true", help="no progress bar or log lines")
    b.add_argument("--json", action="store_true", help="print a JSON summary for scripts")
    b.add_argument("--no-report", action="store_true", help="skip the HTML report")
    b.add_argument("--fresh", action="store_true",
                   help="recompute every partition of species instead of taking the unchanged "
                        "ones from the last build (the outputs are the same)")
    b.add_argument("--tables-csv", action="store_true",
                   help="also write one CSV of evaluated properties per species (tables/)")
    b.add_argument("--table-step", type=number(0.1, 1e5, what="a step in K"), default=100.0,
                   metavar="K",
                   help="temperature step of the evaluated tables after 298.15 K (100)")
    _workers_option(b)
    _reference_option(b)
    _repair_option(b)
    _fit_options(b)

    c = sub.add_parser("check", help="ingest and validate only; print the findings",
                       description="Read and validate raw/ without fitting or writing; exit 1 "
                                   "when any error is found.")
    c.add_argument("--raw", type=Path, default=Path("raw"), help="raw sources folder (raw)")
    c.add_argument("--all", action="store_true", help="also print info findings")
    c.add_argument("--report", type=Path, metavar="FILE",
                   help="also write the findings as JSON (schemas/findings.schema.json)")
    c.add_argument("--json", action="store_true", help="print the findings report as JSON")
    _workers_option(c)
    _reference_option(c)
    _repair_option(c)
    _fit_options(c)

    a = sub.add_parser("audit", help="rebuild into a temporary folder and compare with curated/",
                       description="Check the raw inputs against curated/manifest.json, rebuild "
                                   "with the settings the release records (fit options given "
                                   "here replace them) into a temporary folder and compare: "
                                   "exit 0 when byte-identical, 1 on differences (named by "
                                   "species, size and cause), 2 on errors.")
    a.add_argument("--raw", type=Path, default=Path("raw"), help="raw sources folder (raw)")
    a.add_argument("--curated", type=Path, default=Path("curated"),
                   help="the release to audit (curated)")
    a.add_argument("--json", action="store_true", help="print the audit report as JSON")
    _fit_options(a, recorded=True)

    d = sub.add_parser("diff", help="what changed between two libraries, in properties",
                       description="Compare two libraries (folders or library.json files): "
                                   "species added, removed and changed, with differences of "
                                   "Cp, H-H298, S and G at standard temperatures and the "
                                   "largest over the common range.")
    d.add_argument("old", type=Path, help="the earlier library")
    d.add_argument("new", type=Path, help="the later library")
    d.add_argument("--cp-threshold", type=number(0, 1e6, what="a fraction"), default=None,
                   metavar="FRACTION",
                   help="list a changed species only above this relative Cp difference")
    d.add_argument("--h-threshold", type=number(0, 1e12, what="J/mol"), default=None,
                   metavar="J/MOL",
                   help="... or above this H-H298 difference")
    d.add_argument("--s-threshold", type=number(0, 1e9, what="J/(mol*K)"), default=None,
                   metavar="J/(MOL*K)",
                   help="... or above this S difference")
    d.add_argument("--json", action="store_true", help="print the differences as JSON")

    q = sub.add_parser("props", help="evaluate Cp, H, S and G from a curated library",
                       description="Print Cp, H, S and G = H - TS of one species at the given "
                                   "temperatures [K].")
    q.add_argument("library", type=Path, help="library.json or a curated folder")
    q.add_argument("species", help="species id such as CO2(g), or a name such as CO2")
    q.add_argument("temperatures", nargs="+", type=number(0, 1e6, what="a temperature in K",
                                                          open_low=True), metavar="T",
                   help="temperatures [K]")
    q.add_argument("--phase", help="evaluate this phase (g, l, cr, cr-<form>) instead of the "
                                   "phase stable at each temperature")
    q.add_argument("--no-formation", action="store_true",
                   help="leave out ΔfH°, ΔfG° and log10 Kf")
    q.add_argument("--json", action="store_true", help="print the values as JSON")

    r = sub.add_parser("reaction", help="reaction enthalpy, entropy, Gibbs energy and log10 K",
                       description="Print ΔrH°, ΔrS°, ΔrG° and log10 K of a balanced equation "
                                   "at the given temperatures, with standard uncertainties, "
                                   "from the species of a curated library.")
    r.add_argument("library", type=Path, help="library.json or a curated folder")
    r.add_argument("equation", help="a balanced equation such as \"2 CO + O2 = 2 CO2\" "
                                    "(species joined by ' + '; a phase in parentheses where a "
                                    "name has several: \"C(cr) + O2 = CO2\")")
    r.add_argument("temperatures", nargs="+", type=number(-1e6, 1e6, what="a temperature"),
                   metavar="T", help="temperatures (K unless --temperature-unit)")
    r.add_argument("--temperature-unit", default="K", metavar="UNIT",
                   help="unit of the temperatures given: K, degC, degF, degR (K)")
    r.add_argument("--energy-unit", default="kJ/mol", metavar="UNIT",
                   help="unit of ΔrH° and ΔrG° (kJ/mol); e.g. J/mol, kcal/mol")
    r.add_argument("--entropy-unit", default="J/(mol*K)", metavar="UNIT",
                   help="unit of ΔrS° (J/(mol*K)); e.g. cal/(mol*K)")
    r.add_argument("--json", action="store_true", help="print the values as JSON")
    return p


def _reference_option(p) -> None:
    p.add_argument("--reference-state", action="append", default=[], metavar="EL=SPECIES",
                   help="reference state of element EL for formation properties: a species "
                        "name (its stable phase at each T) or id, e.g. C=C(cr); repeatable; "
                        "wins over source.json 'reference_states' and the defaults")


def _repair_option(p) -> None:
    p.add_argument("--repair", action="append", default=[], metavar="NAME",
                   help="refit the published coefficient sets of species NAME (a name or "
                        "id), of source NAME, or 'all' into continuous sets when the audit "
                        "finds steps or kinks at their breakpoints; repeatable; besides those "
                        "source.json asks to repair")


def reference_states(given) -> tuple:
    """((element, species), ...) sorted from --reference-state EL=SPECIES options;
    InputError for one that cannot be read."""
    from ..core.atomic_weights import STANDARD_ATOMIC_WEIGHTS

    out = {}
    for text in given or ():
        el, sep, name = text.partition("=")
        el, name = el.strip(), name.strip()
        if not sep or el not in STANDARD_ATOMIC_WEIGHTS or not name or len(name) > 80:
            raise InputError(f"--reference-state '{text[:80]}' is not understood",
                             expected="ELEMENT=SPECIES with an element symbol, e.g. C=C(cr)")
        out[el] = name
    return tuple(sorted(out.items()))


def _fit_options(p, recorded=False):
    """The fit options; with ``recorded`` (audit) none has a default, so that only the
    options named on the command line replace the release's recorded settings."""
    g = p.add_argument_group("fit settings (audit: those the release records)" if recorded
                             else "fit settings (defaults: the best general settings)")

    def default(value):
        return argparse.SUPPRESS if recorded else value

    g.add_argument("--form", choices=sorted(forms.FORMS), default=default(FitSettings.form),
                   help="published form of the coefficients (nasa7)")
    g.add_argument("--ranges", type=int, default=default(FitSettings.ranges), choices=(1, 2, 3, 4),
                   help="number of temperature ranges (2)")
    g.add_argument("--breakpoints", default=default("optimise"), metavar="optimise|conventional|K,K",
                   help="optimised breakpoints (default), the conventional one, or fixed values")
    g.add_argument("--conventional-break", type=temperature, default=default(FitSettings.breakpoint),
                   metavar="K", help="the conventional breakpoint [K] (1000)")
    g.add_argument("--continuity", type=int, choices=(1, 2), default=default(FitSettings.continuity),
                   help="continuous derivatives of Cp at breakpoints: 1 = dCp/dT, 2 = also "
                        "d2Cp/dT2 (1)")
    g.add_argument("--minimax", action="store_true", default=default(False),
                   help="minimise the largest relative Cp deviation instead of least squares")
    g.add_argument("--range-of-use", type=temperature, nargs=2, metavar=("TMIN", "TMAX"),
                   default=default(None),
                   help="range of use [K] of every species; ideal gases are extended past "
                        "the data with a physically shaped model, flagged as extrapolated")
    g.add_argument("--accept-cp", type=number(0, 1, what="a fraction", open_low=True),
                   default=default(FitSettings.accept_cp_max_rel),
                   metavar="FRACTION", help="largest accepted relative Cp deviation (0.01)")


#: the fit options and the FitSettings fields each of them sets
FIT_OPTION_FIELDS = {
    "form": ("form",), "ranges": ("ranges",),
    "breakpoints": ("breakpoint_mode", "fixed_breakpoints", "ranges"),
    "conventional_break": ("breakpoint",), "continuity": ("continuity",),
    "minimax": ("minimax",), "range_of_use": ("use_t_min", "use_t_max"),
    "accept_cp": ("accept_cp_max_rel",),
}


def named_fit_options(args):
    """``settings -> settings`` replacing only the fit fields of the options named in
    ``args`` (parsed without defaults, as for audit)."""
    from dataclasses import replace

    named = [k for k in FIT_OPTION_FIELDS if hasattr(args, k)]
    full = argparse.Namespace(**{**_fit_defaults(), **{k: getattr(args, k) for k in named}})
    wanted = settings_of(full).fit

    def apply(settings: Settings) -> Settings:
        fields = {f for k in named for f in FIT_OPTION_FIELDS[k]}
        return replace(settings, fit=replace(settings.fit, **{f: getattr(wanted, f)
                                                              for f in fields}))
    return apply


def _fit_defaults() -> dict:
    p = argparse.ArgumentParser(add_help=False)
    _fit_options(p)
    return vars(p.parse_args([]))


def _outputs(args) -> OutputSettings:
    """The output settings of ``args`` (defaults for commands without output options)."""
    return OutputSettings(report=not getattr(args, "no_report", False),
                          tables_csv=getattr(args, "tables_csv", False),
                          table_step=getattr(args, "table_step", 100.0))


def settings_of(args) -> Settings:
    """The stage settings the parsed ``args`` ask for; InputError for contradictory ones."""
    lo, hi = args.range_of_use if args.range_of_use else (None, None)
    if args.range_of_use and not hi > lo:
        raise InputError(f"--range-of-use {lo:g} {hi:g}: TMAX is not above TMIN",
                         expected="TMIN < TMAX in K")
    mode, fixed = args.breakpoints, ()
    if mode not in ("optimise", "conventional"):
        try:
            fixed = tuple(temperature(x) for x in mode.split(","))
        except argparse.ArgumentTypeError:
            fixed = ()
        if not fixed or len(fixed) > 3 or any(b <= a for a, b in zip(fixed[:-1], fixed[1:])):
            raise InputError(f"--breakpoints '{mode[:60]}' is not understood",
                             expected="optimise, conventional, or one to three increasing "
                                      f"temperatures in {_T_LO:g}-{_T_HI:g} K like 800,2500")
        mode = "fixed"
    ranges = len(fixed) + 1 if fixed else args.ranges
    return Settings(fit=FitSettings(form=args.form, ranges=ranges, breakpoint_mode=mode,
                                    breakpoint=args.conventional_break, fixed_breakpoints=fixed,
                                    continuity=args.continuity, minimax=args.minimax,
                                    use_t_min=lo, use_t_max=hi,
                                    accept_cp_max_rel=args.accept_cp),
                    outputs=_outputs(args),
                    references=reference_states(getattr(args, "reference_state", ())),
                    repair=tuple(sorted(set(getattr(args, "repair", ())))))
