"""Command line: argument parsing and printing only; the stages live in their modules."""

import argparse
import json
import math
import signal
import sys
from pathlib import Path

from . import __version__, build, export, forms, library
from .errors import InputError, ThermoledgerError
from .findings import ERROR, INFO, WARNING, format_block
from .limits import TEMPERATURE_SETTING_RANGE
from .paths import write_atomic
from .progress import Progress
from .settings import FitSettings, OutputSettings, Settings


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


_T_LO, _T_HI = TEMPERATURE_SETTING_RANGE
temperature = number(_T_LO, _T_HI, what="a temperature in K")


def _parser() -> argparse.ArgumentParser:
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
    b.add_argument("--tables-csv", action="store_true",
                   help="also write one CSV of evaluated properties per species (tables/)")
    b.add_argument("--table-step", type=number(0.1, 1e5, what="a step in K"), default=100.0,
                   metavar="K",
                   help="temperature step of the evaluated tables after 298.15 K (100)")
    _fit_options(b)

    c = sub.add_parser("check", help="ingest and validate only; print the findings",
                       description="Read and validate raw/ without fitting or writing; exit 1 "
                                   "when any error is found.")
    c.add_argument("--raw", type=Path, default=Path("raw"), help="raw sources folder (raw)")
    c.add_argument("--all", action="store_true", help="also print info findings")
    c.add_argument("--report", type=Path, metavar="FILE",
                   help="also write the findings as JSON (schemas/findings.schema.json)")
    c.add_argument("--json", action="store_true", help="print the findings report as JSON")
    _fit_options(c)

    a = sub.add_parser("audit", help="rebuild into a temporary folder and compare with curated/",
                       description="Check the raw inputs against curated/manifest.json, rebuild "
                                   "with the given settings into a temporary folder and compare: "
                                   "exit 0 when byte-identical, 1 on differences (named by "
                                   "species, size and cause), 2 on errors.")
    a.add_argument("--raw", type=Path, default=Path("raw"), help="raw sources folder (raw)")
    a.add_argument("--curated", type=Path, default=Path("curated"),
                   help="the release to audit (curated)")
    a.add_argument("--json", action="store_true", help="print the audit report as JSON")
    _fit_options(a)

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
    q.add_argument("--json", action="store_true", help="print the values as JSON")
    return p


def _fit_options(p):
    g = p.add_argument_group("fit settings (defaults: the best general settings)")
    g.add_argument("--form", choices=sorted(forms.FORMS), default=FitSettings.form,
                   help="published form of the coefficients (nasa7)")
    g.add_argument("--ranges", type=int, default=FitSettings.ranges, choices=(1, 2, 3, 4),
                   help="number of temperature ranges (2)")
    g.add_argument("--breakpoints", default="optimise", metavar="optimise|conventional|K,K",
                   help="optimised breakpoints (default), the conventional one, or fixed values")
    g.add_argument("--breakpoint", type=temperature, default=FitSettings.breakpoint,
                   help="the conventional breakpoint [K] (1000)")
    g.add_argument("--continuity", type=int, choices=(1, 2), default=FitSettings.continuity,
                   help="continuous derivatives of Cp at breakpoints: 1 = dCp/dT, 2 = also "
                        "d2Cp/dT2 (1)")
    g.add_argument("--minimax", action="store_true",
                   help="minimise the largest relative Cp deviation instead of least squares")
    g.add_argument("--range-of-use", type=temperature, nargs=2, metavar=("TMIN", "TMAX"),
                   help="range of use [K] of every species; ideal gases are extended past "
                        "the data with a physically shaped model, flagged as extrapolated")
    g.add_argument("--accept-cp", type=number(0, 1, what="a fraction", open_low=True),
                   default=FitSettings.accept_cp_max_rel,
                   metavar="FRACTION", help="largest accepted relative Cp deviation (0.01)")


def _outputs(args) -> OutputSettings:
    return OutputSettings(report=not getattr(args, "no_report", False),
                          tables_csv=getattr(args, "tables_csv", False),
                          table_step=getattr(args, "table_step", 100.0))


def _settings(args) -> Settings:
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
                                    breakpoint=args.breakpoint, fixed_breakpoints=fixed,
                                    continuity=args.continuity, minimax=args.minimax,
                                    use_t_min=lo, use_t_max=hi,
                                    accept_cp_max_rel=args.accept_cp),
                    outputs=_outputs(args))


def _totals(findings):
    n_err = sum(1 for f in findings if f.severity == ERROR)
    n_warn = sum(1 for f in findings if f.severity == WARNING and f.counts)
    n_ack = sum(1 for f in findings if not f.counts)
    return n_err, n_warn, n_ack


def _print_findings(findings, *, show_info=False, out=None):
    out = out or sys.stdout
    by_file = {}
    for f in sorted(findings, key=lambda f: f.sort_key()):
        if f.severity == INFO and not show_info:
            continue
        by_file.setdefault(f.file or f.source or "(raw)", []).append(f)
    for file, items in by_file.items():
        print(f"{file}", file=out)
        for f in items:
            print(format_block(f), file=out)


def cmd_build(args) -> int:
    bar = Progress(quiet=args.quiet or args.json)
    try:
        result = build.build(args.raw, args.out, _settings(args), wait=args.wait, progress=bar)
    except Interrupted as stop:
        bar.close()
        if bar.published:
            print(f"thermoledger build: {stop.name} after the new release was published: "
                  f"{args.out}/ is complete", file=sys.stderr)
            return 0
        print(f"thermoledger build: {stop.name}: nothing was published; {args.out}/ is "
              "unchanged", file=sys.stderr)
        return 128 + stop.signum
    finally:
        bar.close()
    n_err, n_warn, n_ack = _totals(result.findings)
    held = bool(result.quarantined or result.held_back or n_err)
    if args.json:
        print(json.dumps({"species": [s["id"] for s in result.document["species"]],
                          "quarantined": [{"id": q["id"], "file": q["file"],
                                           "code": q["reasons"][0]["code"]}
                                          for q in result.document["quarantined"]],
                          "errors": n_err, "warnings": n_warn, "acknowledged": n_ack,
                          "held_back": [{"file": f, "code": errs[0].code}
                                        for f, errs in result.held_back],
                          "out": str(args.out), "files": len(result.written),
                          "notice": export.NOTICE}, indent=1))
        return 1 if args.strict and held else 0
    print(f"thermoledger build: {len(result.fitted)} species fitted, "
          f"{len(result.quarantined)} table(s) quarantined, {n_err} error(s), "
          f"{n_warn} warning(s), {n_ack} acknowledged")
    for sp in result.document["species"]:
        q = sp["quality"]
        flag = "  extrapolated: " + ", ".join(f"{e['t_min']:g}-{e['t_max']:g} K"
                                               for e in sp["extrapolated"]) if sp["extrapolated"] else ""
        span = f"{sp['ranges'][0]['t_min']:g}-{sp['ranges'][-1]['t_max']:g} K"
        breaks = "/".join(f"{r['t_max']:g}" for r in sp["ranges"][:-1])
        used = [f"{x['file']}" + (f" ({x['rows']} rows)" if i else "")
                for i, x in enumerate(s for s in sp["sources"] if s["used"])]
        dropped = f"  {len(sp['excluded'])} row(s) left out" if sp["excluded"] else ""
        print(f"  fitted      {sp['id']:14s} {span:14s} break {breaks:>6s} K  "
              f"max |dCp/Cp| {100 * q['cp_max_rel_dev']:.3f} %  "
              f"from {' + '.join(used)}{dropped}{flag}")
    for entry in result.document["quarantined"]:
        first = entry["reasons"][0]
        where = entry["file"] + (f":{first['line']}" if first["line"] is not None else "")
        col = f" [{first['column']}]" if first["column"] else ""
        more = f" (+{len(entry['reasons']) - 1} more)" if len(entry["reasons"]) > 1 else ""
        print(f"  QUARANTINED {entry['id']:14s} {where}{col}: {first['code']} "
              f"{first['message']}{more}")
    for file, errs in result.held_back:
        first = errs[0]
        scope = "whole source" if file.endswith("/source.json") else "table not read"
        where = first.file + (f":{first.line}" if first.line is not None else "")
        col = f" [{first.column}]" if first.column else ""
        more = f" (+{len(errs) - 1} more)" if len(errs) > 1 else ""
        print(f"  HELD BACK   {scope:14s} {where}{col}: {first.code} {first.message}{more}")
    print(f"wrote {len(result.written)} files into {args.out}/ (manifest.json lists each with "
          "its sha256; datapackage.json and provenance.json describe the release)")
    print(f"caution: {export.NOTICE}")
    return 1 if args.strict and held else 0


def cmd_check(args) -> int:
    result = build.check(args.raw, _settings(args))
    n_err, n_warn, n_ack = _totals(result.findings)
    if args.json:
        doc = export.findings_document(result.findings)
        print(json.dumps(doc, indent=1))
        if args.report:
            write_atomic(args.report, export.json_bytes(doc))
        return 1 if n_err else 0
    _print_findings(result.findings, show_info=args.all)
    print(f"thermoledger check: {len(result.tables)} table(s) read, "
          f"{len(result.quarantined)} would be quarantined; {n_err} error(s), "
          f"{n_warn} warning(s), {n_ack} acknowledged")
    for file, errs in result.held_back:
        print(f"  held back: {file} ({errs[0].code})")
    if args.report:
        doc = export.findings_document(result.findings)
        export.check_against(doc, "findings.schema.json", str(args.report))
        write_atomic(args.report, export.json_bytes(doc))
        print(f"wrote {args.report}")
    return 1 if n_err else 0


def _from_library(work, what: str):
    """``work()``, with a malformed entry that passed the schema reported as bad input."""
    try:
        return work()
    except ThermoledgerError:
        raise
    except (ValueError, TypeError, KeyError, IndexError, ArithmeticError) as exc:
        raise InputError(f"{what} ({type(exc).__name__}: {exc})",
                         expected="a library written by thermoledger") from None


def cmd_props(args) -> int:
    doc = library.load(args.library)
    sp = library.find_species(doc, args.species)
    values = _from_library(lambda: library.evaluate(sp, args.temperatures),
                           f"{args.library}: {sp['id']} cannot be evaluated")
    if args.json:
        print(json.dumps({"id": sp["id"], "form": sp["form"], "units": {
            "T": "K", "Cp": "J/(mol*K)", "H": "J/mol", "S": "J/(mol*K)", "G": "J/mol"},
            "rows": [{"T": t, **{k: float(values[k][i]) for k in ("Cp", "u_Cp", "H", "u_H", "S",
                                                               "u_S", "G")},
                      "extrapolated": bool(values["extrapolated"][i])}
                     for i, t in enumerate(args.temperatures)]}, indent=1))
        return 0
    print(f"{sp['id']}  {sp['form']}, {sp['ranges'][0]['t_min']:g}-{sp['ranges'][-1]['t_max']:g} K"
          f", from {args.library}")
    print(f"{'T [K]':>10} {'Cp [J/(mol*K)]':>20} {'H [kJ/mol]':>20} {'S [J/(mol*K)]':>18} "
          f"{'G [kJ/mol]':>12}")
    for i, t in enumerate(args.temperatures):
        note = "  extrapolated" if values["extrapolated"][i] else ""
        print(f"{t:10.2f} {values['Cp'][i]:11.4f} ± {values['u_Cp'][i]:6.4f} "
              f"{values['H'][i] / 1000:11.4f} ± {values['u_H'][i] / 1000:6.4f} "
              f"{values['S'][i]:9.4f} ± {values['u_S'][i]:6.4f} "
              f"{values['G'][i] / 1000:12.4f}{note}")
    print("± standard uncertainty of the fit (H and S relative to their exact 298.15 K anchors; "
          "extrapolated intervals include the model's).")
    print("H on the assigned-enthalpy scale (H(298.15 K) = enthalpy of formation); S at 1 bar.")
    return 0


def cmd_audit(args) -> int:
    from . import audit

    rep = audit.audit(args.raw, args.curated, _settings(args))
    if args.json:
        print(json.dumps(rep.to_dict(), indent=1))
    else:
        print(audit.render(rep))
    return rep.status


def cmd_diff(args) -> int:
    from . import diff

    old, new = library.load(args.old), library.load(args.new)
    d = _from_library(lambda: diff.diff(old, new, cp_threshold=args.cp_threshold,
                                        h_threshold=args.h_threshold,
                                        s_threshold=args.s_threshold),
                      f"{args.old} or {args.new} cannot be compared")
    print(json.dumps(d, indent=1) if args.json else diff.render(d))
    return 0


COMMANDS = {"build": cmd_build, "check": cmd_check, "audit": cmd_audit, "diff": cmd_diff,
            "props": cmd_props}


class Interrupted(BaseException):
    """SIGINT or SIGTERM received: unwinds the stages (staging folders are removed)."""

    def __init__(self, signum: int):
        self.signum = signum
        self.name = {signal.SIGINT: "interrupted (SIGINT)",
                     signal.SIGTERM: "terminated (SIGTERM)"}.get(signum, f"signal {signum}")
        super().__init__(self.name)


def _on_signal(signum, frame):
    raise Interrupted(signum)


def main(argv=None) -> int:
    previous = {s: signal.signal(s, _on_signal) for s in (signal.SIGINT, signal.SIGTERM)}
    try:
        args = _parser().parse_args(argv)
        return _run(args)
    except Interrupted as stop:
        print(f"thermoledger: {stop.name}", file=sys.stderr)
        return 128 + stop.signum
    finally:
        for s, handler in previous.items():
            signal.signal(s, handler)


def _run(args) -> int:
    try:
        return COMMANDS[args.command](args)
    except ThermoledgerError as exc:
        print(f"thermoledger {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a pager or head that closed early
        sys.stderr.close()
        return 0
    except OSError as exc:
        print(f"thermoledger {args.command}: error: cannot read or write "
              f"{exc.filename or ''}: {exc.strerror or exc}", file=sys.stderr)
        return 2
    except Interrupted as stop:
        print(f"thermoledger {args.command}: {stop.name}", file=sys.stderr)
        return 128 + stop.signum
    except Exception as exc:  # noqa: BLE001 - the last net: one line, never a traceback
        print(f"thermoledger {args.command}: internal error ({type(exc).__name__}: {exc}); "
              "please report it with the command that caused it", file=sys.stderr)
        return 3


if __name__ == "__main__":
    sys.exit(main())
