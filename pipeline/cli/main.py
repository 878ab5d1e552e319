"""Command line: each command wires the stages and prints what ``render`` makes of their
results; parsing lives in ``parse``. Each command imports the stages it uses when it runs,
so that reading a library (``props``, ``reaction``) starts without loading the build's
libraries (pandas, scipy, pint)."""

import json
import signal
import sys

from ..core.errors import InputError, ThermoledgerError, chain_of
from ..core.paths import write_atomic
from ..library import document as library
from ..library.entries import by_id as entries_by_id
from . import render
from .parse import named_fit_options, parser, settings_of
from .progress import Progress


class _Held:
    """What a command made that is kept until the process ends (``keep``: the console
    command, entry.run, which ends it without freeing them), instead of being freed when
    the command returns: a large build's result is millions of objects."""

    def __init__(self):
        self.keep, self.items = False, []

    def __call__(self, obj) -> None:
        if self.keep:
            self.items.append(obj)


HELD = _Held()


def _say(lines, out=None) -> None:
    print("\n".join(lines), file=out or sys.stdout)


def cmd_build(args) -> int:
    """``thermoledger build``: every stage, one release published; 1 with --strict when anything
    was held back."""
    from .. import build
    from ..release import document as release_document

    bar = Progress(quiet=args.quiet or args.json)
    try:
        result = build.build(args.raw, args.out, settings_of(args), wait=args.wait, progress=bar,
                             workers=args.workers, fresh=args.fresh)
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
    HELD(result)
    n_err = render.totals(result.findings)[0]
    held = bool(result.quarantined or result.held_back or n_err)
    notice = release_document.NOTICE
    if args.json:
        print(json.dumps(render.build_json(result, args.out, notice), indent=1))
    else:
        _say(render.build_summary(result, args.out, notice))
    return 1 if args.strict and held else 0


def cmd_check(args) -> int:
    """``thermoledger check``: ingest, validate and reconcile; findings printed; 1 on errors."""
    from .. import build
    from ..release import document as release_document

    result = build.examine(args.raw, settings_of(args), workers=args.workers, rows=False)
    HELD(result)
    n_err = render.totals(result.findings)[0]
    doc = release_document.findings_document(result.findings)
    if args.json:
        print(json.dumps({**doc, "findings": list(doc["findings"])}, indent=1))
    else:
        _say(render.findings_by_file(result.findings, show_info=args.all))
        _say(render.check_summary(result))
    if args.report:
        release_document.require_valid(doc, "findings.schema.json", str(args.report))
        write_atomic(args.report, release_document.json_bytes(doc))
        if not args.json:
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
    """``thermoledger props``: Cp, H, S, G of one species at the given temperatures [K]; the
    phase stable at each temperature for a species whose phases are linked by transitions,
    unless --phase names one."""
    from ..library.formation import Formation

    doc = library.load(args.library)
    ids = library.phases_at(doc, args.species, args.temperatures, args.phase)
    by_id = entries_by_id(doc)
    values = _from_library(lambda: library.evaluate_phases(doc, ids, args.temperatures),
                           f"{args.library}: {', '.join(dict.fromkeys(ids))} cannot be "
                           "evaluated")
    sps = [by_id[i] for i in ids]
    made = None if args.no_formation else Formation(doc)
    formed = _from_library(lambda: made.at_ids(ids, args.temperatures), f"{args.library}: "
                           "formation properties cannot be evaluated") if made else None
    missing = made.missing(ids[0]) if made and formed is None else []
    refs = made.states if made else {}
    if args.json:
        print(json.dumps(render.props_json(sps, args.temperatures, values, formed, missing,
                                           refs), indent=1))
    else:
        _say(render.props_table(sps, args.temperatures, values, args.library))
        if made:
            _say(render.formation_table(sps, args.temperatures, formed, missing, refs))
    return 0


def cmd_reaction(args) -> int:
    """``thermoledger reaction``: ΔrH°, ΔrS°, ΔrG° and log10 K of an equation at the given
    temperatures, from a curated library."""
    from ..core import units
    from ..library import reaction

    t = units.to_si(args.temperatures, args.temperature_unit, "temperature")
    doc = library.load(args.library)
    got = _from_library(lambda: reaction.evaluate(doc, args.equation, t),
                        f"{args.library}: the reaction cannot be evaluated")
    shown = render.reaction_units(args.energy_unit, args.entropy_unit)
    if args.json:
        print(json.dumps(render.reaction_json(got, args.temperatures, args.temperature_unit,
                                              shown), indent=1))
    else:
        _say(render.reaction_table(got, args.library, shown))
    return 0


def cmd_audit(args) -> int:
    """``thermoledger audit``: rebuild and compare with a release; 0 pass, 1 differences."""
    from .. import build
    from ..release import audit

    rep = build.audit(args.raw, args.curated, override=named_fit_options(args))
    print(json.dumps(rep.to_dict(), indent=1) if args.json else audit.render(rep))
    return rep.status


def cmd_diff(args) -> int:
    """``thermoledger diff``: property differences between two libraries."""
    from ..library import diff

    old, new = library.load(args.old), library.load(args.new)
    d = _from_library(lambda: diff.diff(old, new, cp_threshold=args.cp_threshold,
                                        h_threshold=args.h_threshold,
                                        s_threshold=args.s_threshold),
                      f"{args.old} or {args.new} cannot be compared")
    print(json.dumps(d, indent=1) if args.json else diff.render(d))
    return 0


COMMANDS = {"build": cmd_build, "check": cmd_check, "audit": cmd_audit, "diff": cmd_diff,
            "props": cmd_props, "reaction": cmd_reaction}


class Interrupted(BaseException):
    """SIGINT or SIGTERM received: unwinds the stages (staging folders are removed)."""

    def __init__(self, signum: int):
        self.signum = signum
        self.name = {signal.SIGINT: "interrupted (SIGINT)",
                     signal.SIGTERM: "terminated (SIGTERM)"}.get(signum, f"signal {signum}")
        super().__init__(self.name)

    def __reduce__(self):
        return type(self), (self.signum,)


def _on_signal(signum, frame):
    raise Interrupted(signum)


def main(argv=None) -> int:
    """Run one command; the exit status (0 ok, 1 findings or differences, 2 bad input, 3 an
    internal error, 128 + signal when interrupted)."""

    previous = {s: signal.signal(s, _on_signal) for s in (signal.SIGINT, signal.SIGTERM)}
    try:
        args = parser().parse_args(argv)
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
        stop = _interrupt_behind(exc)
        if stop is not None:
            print(f"thermoledger {args.command}: {stop.name}", file=sys.stderr)
            return 128 + stop.signum
        print(f"thermoledger {args.command}: internal error ({type(exc).__name__}: {exc}); "
              "please report it with the command that caused it", file=sys.stderr)
        return 3


def _interrupt_behind(exc):
    """The Interrupted that caused ``exc``, when one did: Python 3.11 wraps what a class
    body's __set_name__ raises in a RuntimeError, so that a Ctrl-C arriving while a module
    defines a dataclass reaches the command as that RuntimeError."""
    return next((e for e in chain_of(exc) if isinstance(e, Interrupted)), None)


if __name__ == "__main__":
    sys.exit(main())
