"""Fuzzed raw inputs of every kind the reliability run used, and the harness that answers
them; shared by tests/test_fuzz_inputs.py (a sample) and benchmarks/fuzz_inputs.py (all).

Every PUBLISH_EVERY-th case is built in full, report and publishing included.

Each case is one source folder ``lab`` with one table ``t.csv`` (bytes) and its
``source.json`` (bytes), built deterministically from a seed. ``answer`` runs the whole
pipeline short of writing (ingest, validate, reconcile, fit, release assembly) on it and
reports whether an exception escaped and whether the input was answered: either the table
was fitted, or a finding names its file (a CSV finding with a line names a line).
"""

import json
import random
import signal
import tempfile
from pathlib import Path

GOOD_ROWS = [(200 + 100 * i, 29.0 + 0.004 * (200 + 100 * i) - 1e-6 * (200 + 100 * i) ** 2)
             for i in range(14)]
HEADER = "T [K],Cp [J/(mol*K)],u(Cp) [J/(mol*K)]"
ENTRY = {"file": "t.csv", "species": "N2", "formula": "N2", "phase": "g", "geometry": "linear",
         "enthalpy_of_formation_298": "0 kJ/mol", "entropy_298": "191.6 J/(mol*K)"}
SOURCE = {"source": "lab", "title": "fuzz", "citation": "fuzz", "method": "other",
          "standard_pressure": "1 bar", "priority": 1, "license": "CC0-1.0", "tables": [ENTRY]}

CELLS = ["1e308", "-1e308", "1.8e308", "1e-320", "1e-300", "0", "-0", "nan", "NaN", "inf",
         "-inf", "", " ", "-", "--", "1,5", "1.2.3", "0x10", "1_000", "9" * 400, "1e29",
         "\uff11\uff12\uff13", "\u0661\u0662\u0663", "\u00b9", "1e", "e5", ".", "+", "\"1\"",
         "1e-5", "12345678901234567890", "=1+1", "@SUM(A1)", "\x00", "\u202e12", "1 000",
         "300 K", "3e2", "  42  ", "4.2E+01", "∞", "−5"]
UNITS = ["K", "degC", "degF", "degR", "J/(mol*K)", "cal/(mol*K)", "kJ/(kmol*K)", "J/(g*K)",
         "K**2**2**2**2**2", "K**9**9**9", "K^99", "K**(1e9)", "K*1e400", "J/(mol*K)" * 12,
         "", " ", "mol", "kg", "°C", "J mol-1 K-1", "J·K⁻¹·mol⁻¹", "Pa", "eV/K", "1/K",
         "K*" + "9" * 50, "(((K)))", "K)", "(K", "m/s", "J/(mol*K)**0.5", "dimensionless",
         "%", "delta_degC", "kelvin", "BTU/(lb*degR)", "cal_it/(g*K)"]
QUANTITIES = ["0 kJ/mol", "1e308 kJ/mol", "-1e308 kJ/mol", "inf kJ/mol", "nan J/mol",
              "1 K**2**2**2**2**2", "12", "", "kJ/mol", "1e5 kJ/mol", "-393.51 kJ/mol",
              "1 K", "0 bar", "-1 bar", "1e-300 bar", "1 atm", "1e30 Pa", "\uff11 bar",
              "213.8 J/(mol*K)", "-5 J/(mol*K)", "1e300 J/(mol*K)", "1 K**9**9**9"]
NUMBERS = [0, -1, 1e-300, 1e300, 123456789012345678901234567890, 0.5, 1000, 6000, 1e5,
           -1e308, 2.5, True, None, "1000", [], {}, [1000, 1000, 1000], [3000, 500],
           [1e-300], [1e300], [500, 1000, 2000]]


def _csv(rows, header=HEADER) -> str:
    return header + "\n" + "\n".join(",".join(str(c) for c in r) for r in rows) + "\n"


def good_table() -> str:
    return _csv([(t, f"{c:.4f}", f"{0.003 * c:.4f}") for t, c in GOOD_ROWS])


def _mutate_bytes(rng, data: bytes) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randint(1, 8)):
        op = rng.random()
        i = rng.randrange(len(b) + 1)
        if op < 0.4 and b:
            b[min(i, len(b) - 1)] = rng.randrange(256)
        elif op < 0.7:
            b[i:i] = bytes(rng.randrange(256) for _ in range(rng.randint(1, 4)))
        elif b:
            del b[i:i + rng.randint(1, 6)]
    return bytes(b)


def _cells_case(rng):
    rows = [[t, f"{c:.4f}", f"{0.003 * c:.4f}"] for t, c in GOOD_ROWS]
    for _ in range(rng.randint(1, 4)):
        rows[rng.randrange(len(rows))][rng.randrange(3)] = rng.choice(CELLS)
    return _csv(rows).encode("utf-8", "surrogatepass"), None


def _units_case(rng):
    cols = ["T", "Cp", "u(Cp)"]
    header = ",".join(f"{c} [{rng.choice(UNITS) if rng.random() < 0.6 else u}]"
                      for c, u in zip(cols, ("K", "J/(mol*K)", "J/(mol*K)")))
    return good_table().replace(HEADER, header, 1).encode(), None


def _scale_case(rng):
    f = rng.choice([1e300, 1e-300, 1e30, 1e-30, 1e10, -1, 4.184, 1 / 4.184, 1000, 8.314])
    col = rng.randrange(3)
    rows = []
    for t, c in GOOD_ROWS:
        r = [t, c, 0.003 * c]
        r[col] = r[col] * f
        rows.append([f"{x:.6g}" for x in r])
    return _csv(rows).encode(), None


def _encoding_case(rng):
    text = good_table().replace("Cp [", rng.choice(["Cp° [", "Cpé [", "Cpµ [", "Cp [", "Cp\u00a0["]))
    enc = rng.choice(["utf-8", "utf-8-sig", "utf-16", "utf-16-le", "latin-1", "cp1252",
                      "utf-32"])
    try:
        data = text.encode(enc)
    except UnicodeEncodeError:
        data = text.encode("utf-8")
    if rng.random() < 0.3:
        data = bytes(rng.randrange(256) for _ in range(rng.randint(1, 16))) + data
    if rng.random() < 0.2:
        data = data.replace(b"\n", rng.choice([b"\r\n", b"\r", b"\n\n", b"\x00\n"]))
    return data, None


def _structure_case(rng):
    rows = [[t, f"{c:.4f}", f"{0.003 * c:.4f}"] for t, c in GOOD_ROWS]
    op = rng.randrange(8)
    if op == 0:
        rows = rows[: rng.randint(0, 4)]
    elif op == 1:
        rows.append(rows[rng.randrange(len(rows))])
    elif op == 2:
        rows[rng.randrange(len(rows))].append("extra")
    elif op == 3:
        del rows[rng.randrange(len(rows))][rng.randrange(3)]
    elif op == 4:
        rng.shuffle(rows)
    elif op == 5:
        return ('"' + good_table()).encode(), None
    elif op == 6:
        header = ",".join(rng.choice(["T [K]", "Cp [J/(mol*K)]", "u(Cp) [J/(mol*K)]", "S [J/(mol*K)]",
                                      "H-H298 [kJ/mol]", "Cv [J/(mol*K)]", "T", "", "[K]"])
                          for _ in range(3))
        return _csv(rows, header).encode(), None
    else:
        return b"", None
    return _csv(rows).encode(), None


def _source_case(rng):
    doc = json.loads(json.dumps(SOURCE))
    entry = doc["tables"][0]
    for _ in range(rng.randint(1, 3)):
        op = rng.randrange(9)
        if op == 0:
            doc.pop(rng.choice(list(doc)), None)
        elif op == 1:
            entry.pop(rng.choice(list(entry)), None)
        elif op == 2:
            key = rng.choice(["enthalpy_of_formation_298", "entropy_298"])
            entry[key] = rng.choice(QUANTITIES)
        elif op == 3:
            doc["standard_pressure"] = rng.choice(QUANTITIES)
        elif op == 4:
            key = rng.choice(["ranges", "use_t_min", "use_t_max", "breakpoints", "continuity",
                              "form", "minimax"])
            entry.setdefault("fit", {})[key] = rng.choice(NUMBERS + ["nasa9", "optimise"])
        elif op == 5:
            entry[rng.choice(["formula", "species", "phase", "geometry", "file"])] = rng.choice(
                ["", "Xx9", "(((", "C" * 300, "../../etc/passwd", "t.csv", "N2", "g", "cr",
                 "monatomic", 5, None, "NO+", "Zz"])
        elif op == 6:
            doc[rng.choice(["priority", "source", "tables"])] = rng.choice(NUMBERS + ["x"])
        elif op == 7:
            entry["acknowledge"] = [{"code": rng.choice(["COL-UNKNOWN", "x", "TAB-EMPTY"]),
                                     "reason": rng.choice(["ok!", "", "because"]),
                                     "line": rng.choice([1, 0, -1, "1", 10 ** 30])}]
        else:
            doc["tables"] = [entry] * rng.choice([0, 2])
    text = json.dumps(doc)
    mode = rng.random()
    if mode < 0.1:
        text = "[" * rng.choice([40, 1000, 100000]) + "]" * 3
    elif mode < 0.2:
        text = text.replace('"source": "lab"', '"source": "lab", "source": "lab"', 1)
    elif mode < 0.3:
        return good_table().encode(), _mutate_bytes(rng, text.encode())
    elif mode < 0.35:
        text = text.replace("1 bar", "NaN").replace('"priority": 1', '"priority": NaN')
    return good_table().encode(), text.encode()


PHASES = ["cr", "l", "g", "cr-alpha", "cr2", "", "solid", "L", "cr-", "-", "l l", "\u03b1", 7]


def _phases_case(rng):
    """A table with a phase column and a source with transitions, both fuzzed."""
    n = rng.randint(1, 30)
    labels = [rng.choice(PHASES) for _ in range(rng.randint(1, 3))]
    rows = [(str(labels[i * len(labels) // n]), 200 + 50 * i, f"{24.0 + 0.01 * i:.4f}")
            for i in range(n)]
    header = rng.choice(["phase,T [K],Cp [J/(mol*K)]", "Phase,T [K],H-H298 [kJ/mol]",
                         "phase,T [K],Cp [J/(mol*K)],-(G-H298)/T [J/(mol*K)]"])
    if header.count(",") == 3:
        rows = [r + (rng.choice(["30.1", "", "x", "-5"]),) for r in rows]
    doc = json.loads(json.dumps(SOURCE))
    entry = {"file": "t.csv", "species": "Al", "formula": rng.choice(["Al", "Al2O3", "Zz"]),
             "enthalpy_of_formation_298": rng.choice(QUANTITIES),
             "entropy_298": rng.choice(QUANTITIES)}
    if rng.random() < 0.7:
        entry["anchor_phase"] = rng.choice(PHASES)
    if rng.random() < 0.2:
        entry["phase"] = rng.choice(PHASES)
    doc["tables"] = [entry]
    doc["transitions"] = [{"species": rng.choice(["Al", "X"]), "from": rng.choice(PHASES),
                           "to": rng.choice(PHASES),
                           "temperature": rng.choice(QUANTITIES + ["500 K", "5000 K", "0 K"]),
                           "enthalpy": rng.choice(QUANTITIES + ["10 kJ/mol", "-3 kJ/mol"])}
                          for _ in range(rng.randint(0, 3))]
    return _csv(rows, header).encode(), json.dumps(doc).encode()


def _random_text_case(rng):
    alphabet = "0123456789.,;-+eE KTCpHS[]()/*\n\t\"'#°µ\x00\u00e9\uff11"
    return "".join(rng.choice(alphabet) for _ in range(rng.randint(0, 600))).encode(), None


def _mutated_case(rng):
    return _mutate_bytes(rng, good_table().encode()), None


def _large_case(rng):
    op = rng.randrange(3)
    if op == 0:   # many rows (past the row limit or near it)
        n = rng.choice([5000, 60000])
        rows = [(200 + i * 0.01, f"{29.1 + i * 1e-6:.6f}", "0.09") for i in range(n)]
        return _csv(rows).encode(), None
    if op == 1:   # many columns
        header = ",".join(["T [K]", "Cp [J/(mol*K)]"] + [f"x{i} [K]" for i in range(100)])
        rows = [[t, f"{c:.4f}"] + ["1"] * 100 for t, c in GOOD_ROWS]
        return _csv(rows, header).encode(), None
    return b"T [K],Cp [J/(mol*K)]\n" + b"300," + b"9" * (9 * 1024 * 1024) + b"\n", None


KINDS = {  # name: (generator, share of the cases)
    "bad cells": (_cells_case, 20),
    "unit strings": (_units_case, 12),
    "scaled columns": (_scale_case, 8),
    "encodings": (_encoding_case, 8),
    "structure": (_structure_case, 10),
    "source.json": (_source_case, 20),
    "phases": (_phases_case, 8),
    "random text": (_random_text_case, 8),
    "mutated bytes": (_mutated_case, 14),
}
LARGE_EVERY = 400    # one oversize case among this many (each costs a large file write)
PUBLISH_EVERY = 20   # one case in this many runs the whole build, report and publishing


def cases(n: int, seed: int = 2026):
    """(index, kind, table bytes, source.json bytes or None) for ``n`` seeded cases."""
    rng = random.Random(seed)
    names = list(KINDS)
    weights = [KINDS[k][1] for k in names]
    for i in range(n):
        if i % LARGE_EVERY == LARGE_EVERY - 1:
            kind, gen = "oversize", _large_case
        else:
            kind = rng.choices(names, weights)[0]
            gen = KINDS[kind][0]
        table, meta = gen(random.Random(rng.random()))
        yield i, kind, table, meta


class Hang(Exception):
    pass


def _alarm(*_):
    raise Hang()


def answer(kind: str, table: bytes, meta: bytes | None, limit: int = 20,
           publish: bool = False) -> dict:
    """Run the pipeline on one case, without writing (or, with ``publish``, the whole build
    with its report into a temporary release home); what happened."""
    from .. import build
    from ..core.settings import OutputSettings, Settings

    with tempfile.TemporaryDirectory() as tmp:
        lab = Path(tmp) / "raw" / "lab"
        lab.mkdir(parents=True)
        (lab / "t.csv").write_bytes(table)
        (lab / "source.json").write_bytes(meta if meta is not None
                                          else json.dumps(SOURCE).encode())
        old = signal.signal(signal.SIGALRM, _alarm)
        signal.alarm(limit)
        try:
            if publish:
                result = build.build(lab.parent, Path(tmp) / "out", Settings())
            else:
                result = build.build(lab.parent, None,
                                     Settings(outputs=OutputSettings(report=False)), write=False)
        except Hang:
            return {"kind": kind, "outcome": "hang", "detail": ""}
        except Exception as exc:  # noqa: BLE001 - what the benchmark counts
            return {"kind": kind, "outcome": "exception",
                    "detail": f"{type(exc).__name__}: {str(exc)[:200]}"}
        finally:
            signal.alarm(0)
            signal.signal(signal.SIGALRM, old)
    fitted = bool(result.document["species"])
    named = [f for f in result.findings if f.file in ("lab/t.csv", "lab/source.json")]
    lines_ok = all(isinstance(f.line, int) and f.line >= 1 for f in named if f.line is not None)
    errors = [f for f in named if f.severity == "error"]
    answered = fitted or bool(errors)   # fitted, or held back with the reason named
    return {"kind": kind, "outcome": "answered" if answered and lines_ok else "unanswered",
            "detail": "" if answered else f"fitted={fitted} findings={[f.code for f in named]}"}
