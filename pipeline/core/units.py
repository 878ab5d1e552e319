"""Unit parsing and conversion to SI at the edges of the pipeline (wraps pint).

Internal units: K, J/mol, J/(mol K), Pa. Temperatures are converted affinely
(degC, degF are offsets, degR a factor), never by a factor alone. A bare
``cal`` is pint's thermochemical calorie (4.184 J exactly); the IT calorie is
written ``cal_it``. Mass-based quantities (per g, per kg) become molar ones by
multiplying with the molar mass [g/mol] computed from the formula.

References
----------
pint documentation, default unit definitions (``default_en.txt``): calorie =
4.184 J (thermochemical), international_calorie = 4.1868 J.
"""

import re
from functools import lru_cache

import numpy as np

from .errors import UnitError, let_through
from .limits import MAX_UNIT_EXPONENT, MAX_UNIT_LENGTH

#: column kind -> (molar dimensionality, mass-based dimensionality or None, SI unit)
KINDS = {
    "temperature": ("[temperature]", None, "K"),
    "heat_capacity": ("[energy]/[substance]/[temperature]", "[energy]/[mass]/[temperature]",
                      "J/(mol*K)"),
    "enthalpy": ("[energy]/[substance]", "[energy]/[mass]", "J/mol"),
    "pressure": ("[pressure]", None, "Pa"),
}


#: the folder where the registry keeps pint's parsed unit definitions (``keep_definitions``)
_KEPT = [None]


def keep_definitions(folder) -> None:
    """Have the registry, when this process makes it, keep pint's parsed unit definitions
    in ``folder`` (pint's own cache, keyed by the definitions' content) and read them from
    there the next time: 0.09 s becomes 0.01 s. A build sets it to a folder of its store of
    partitions, named by pint's version, so that a rebuild's processes start sooner."""
    _KEPT[0] = folder


@lru_cache(maxsize=1)
def registry():
    """The one pint registry of the process (building it takes a tenth of a second, a
    hundredth with the definitions kept: ``keep_definitions``)."""
    import pint

    if _KEPT[0] is not None:
        try:
            return pint.UnitRegistry(cache_folder=str(_KEPT[0]))
        except Exception as exc:  # noqa: BLE001 - a damaged cache: read the definitions again
            let_through(exc)
    return pint.UnitRegistry()


_EXPONENT = re.compile(r"(\*\*|\^)\s*(\([^()]*\)|[+-]?[0-9.eE]*)")
#: a plain ASCII decimal literal (the pattern of ``is_plain_number``)
PLAIN_NUMBER = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
_NUMBER = re.compile(rf"^{PLAIN_NUMBER}$")
_PLAIN_LINES = re.compile(rf"(?:{PLAIN_NUMBER}\n)*{PLAIN_NUMBER}")


def check_complexity(text: str) -> None:
    """Refuse unit text that is too long, holds long digit runs, or has exponents that are
    not small plain numbers (``K**9**9**9`` would take pint hours); UnitError with
    ``code`` = 'UNIT-TOO-COMPLEX'."""
    def fail(why):
        err = UnitError(f"unit '{text[:MAX_UNIT_LENGTH]}' {why}",
                        expected=f"a plain unit of at most {MAX_UNIT_LENGTH} characters with "
                                 f"exponents of at most {MAX_UNIT_EXPONENT}, e.g. J/(mol*K)")
        err.code = "UNIT-TOO-COMPLEX"
        raise err
    if len(text) > MAX_UNIT_LENGTH:
        fail(f"is {len(text)} characters long")
    for m in _EXPONENT.finditer(text):
        number = m.group(2).replace("(", "").replace(")", "").replace(" ", "")
        if not _NUMBER.match(number) or abs(float(number)) > MAX_UNIT_EXPONENT:
            fail(f"has the exponent '{m.group(2).strip() or '?'}'")
        after = text[m.end():].lstrip()
        if after.startswith(("**", "^")):
            fail("raises a power to a power")
    for digits in re.findall(r"[0-9]+", text):
        if len(digits) > 6:
            fail(f"holds the number {digits[:12]}…")


def is_plain_number(text: str) -> bool:
    """True for a plain ASCII decimal literal (no 'nan', 'inf', '1_0', Unicode digits)."""
    return bool(_NUMBER.match(text))


def all_plain_numbers(cells) -> bool:
    """True when every one of ``cells`` (a non-empty sequence of strings) is a plain number
    (``is_plain_number``): one regular-expression match over the whole column."""
    joined = "\n".join(cells)
    return joined.count("\n") == len(cells) - 1 and bool(_PLAIN_LINES.fullmatch(joined))


#: how papers and spreadsheets write products and powers, and what pint reads instead
_PRODUCT = str.maketrans({"·": " ", "⋅": " ", "•": " ", "−": "-", "°": "deg"})
_SUPERSCRIPTS = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺", "0123456789-+")
_SUPERSCRIPT_RUN = re.compile(r"[⁻⁺]?[⁰¹²³⁴⁵⁶⁷⁸⁹]+")
#: an integer written straight after a unit symbol (K-1, mol-1, cm3) is its exponent
_BARE_POWER = re.compile(r"(?<=[A-Za-z)])([+-]?[0-9]+)(?=$|[\s*/)])")


def normalise(text: str) -> str:
    """Unit text as papers write it, rewritten for pint: ``J·K⁻¹·mol⁻¹`` and ``J K-1 mol-1``
    become ``J K**-1 mol**-1``, ``°C`` becomes ``degC``; a product by juxtaposition (a space)
    is pint's own. Nothing else is changed, so a unit pint cannot read still fails."""
    text = _SUPERSCRIPT_RUN.sub(lambda m: "**" + m.group().translate(_SUPERSCRIPTS),
                                text.translate(_PRODUCT))
    return _BARE_POWER.sub(r"**\1", text).strip()


@lru_cache(maxsize=512)
def _parse_unit(text: str):
    check_complexity(text)
    ureg = registry()
    try:
        unit = ureg.parse_units(normalise(text))
    except Exception as exc:  # pint raises many types for malformed text
        raise UnitError(f"unit '{text}' cannot be read ({type(exc).__name__})",
                        expected="a unit such as K, degC, J/(mol*K), cal/(mol*K), kJ/mol") from None
    return unit


def is_unit(text: str) -> bool:
    """True when pint reads ``text`` (after ``normalise``) as a unit of any dimension."""
    if any(text == unit for unit, _ in SETTLED):
        return True
    try:
        _parse_unit(text)
    except UnitError:
        return False
    return True


def _dimension_of(unit, kind: str, text: str) -> str:
    """Return 'molar' or 'mass' for ``unit`` in a column of ``kind``; raise otherwise."""
    molar, mass, _ = KINDS[kind]
    q = registry().Quantity(1.0, unit)
    if q.check(molar):
        return "molar"
    if mass is not None and q.check(mass):
        return "mass"
    expected = molar if mass is None else f"{molar} or {mass}"
    if re.search(r"/\s*[A-Za-z_]+\s+[A-Za-z(]", text):
        expected += "; 'J/mol K' reads as (J/mol)*K: write J/(mol K)"
    raise UnitError(f"unit '{text}' has dimension {q.dimensionality}, not that of {kind}",
                    expected=expected)


@lru_cache(maxsize=512)
def check_unit(text: str, kind: str) -> str:
    """Raise UnitError unless ``text`` is a unit for ``kind``; return 'molar' or 'mass'
    (remembered: every table of a catalogue names the same few units)."""
    if (text, kind) in SETTLED:
        return SETTLED[text, kind][0]
    return _dimension_of(_parse_unit(text), kind, text)


def to_si(values, unit_text: str, kind: str, molar_mass: float | None = None) -> np.ndarray:
    """Convert ``values`` given in ``unit_text`` to the SI unit of ``kind``.

    Parameters
    ----------
    values : array-like of float, in [unit_text]
    unit_text : str, a unit understood by pint (offset temperatures allowed)
    kind : one of KINDS
    molar_mass : float [g/mol], needed when the unit is mass-based

    Returns
    -------
    numpy.ndarray of float, in [K], [J/mol], [J/(mol K)] or [Pa] by ``kind``.
    """
    basis, scale, offset = _affine(unit_text, kind)
    arr = np.asarray(values, dtype=float)
    with np.errstate(over="ignore", invalid="ignore"):  # overflow -> inf, caught by the caller
        if basis == "mass":
            if molar_mass is None:
                raise UnitError(f"unit '{unit_text}' is per mass but no molar mass is known")
            return (arr * scale + offset) * molar_mass
        out = arr * scale + offset
    if kind == "temperature" and (scale, offset) != (1.0, 0.0):
        out = trim_round_off(out)
    return out


#: significant digits a converted temperature keeps: more than any table states, fewer than
#: the ~16 of a double, so the round-off of the conversion (3999.999999999915 K for
#: 6740.33 degF) goes and the value is the one the data give (4000 K)
TEMPERATURE_DIGITS = 12


#: a converted value this close (relative) to its TEMPERATURE_DIGITS rounding is round-off
ROUND_OFF = 1e-13


def trim_round_off(values) -> np.ndarray:
    """``values`` with conversion round-off removed: each one within ROUND_OFF (relative) of
    its rounding to TEMPERATURE_DIGITS significant digits becomes that rounding; values given
    with more digits, and non-finite or zero ones, are kept."""
    arr = np.asarray(values, dtype=float)
    ok = np.isfinite(arr) & (arr != 0)
    # digits after the decimal point that keep TEMPERATURE_DIGITS significant ones; scaling
    # by an exact power of ten (|k| <= 22) and rounding gives the nearest double to the
    # decimal rounding, as formatting would
    k = np.where(ok, TEMPERATURE_DIGITS - 1 - np.floor(np.log10(np.abs(np.where(ok, arr, 1.0)))),
                 0).astype(int)
    ok &= np.abs(k) <= 22
    k = np.where(ok, k, 0)
    up, down = 10.0 ** np.maximum(k, 0), 10.0 ** np.maximum(-k, 0)
    with np.errstate(invalid="ignore", over="ignore"):   # non-finite values are kept
        rounded = np.round(arr * up / down) * down / up
        near = ok & (np.abs(arr - rounded) <= ROUND_OFF * np.abs(arr))
    return np.where(near, rounded, arr)


def from_si(values, unit_text: str, kind: str, molar_mass: float | None = None) -> np.ndarray:
    """Inverse of ``to_si``: SI values back into ``unit_text`` (for messages in the file's unit)."""
    basis, scale, offset = _affine(unit_text, kind)
    arr = np.asarray(values, dtype=float)
    if basis == "mass":
        arr = arr / molar_mass
    return (arr - offset) / scale


#: (unit as written, kind) -> (basis, scale, offset) of the units nearly every table and
#: source.json states, as pint gives them (``pint_affine``; tests/test_units.py compares
#: each with pint): a process that meets no other unit never builds pint's registry (some
#: 0.2 s of a worker's first partition with pint's import)
SETTLED = {
    ("K", "temperature"): ("molar", 1.0, 0.0),
    ("J/(mol*K)", "heat_capacity"): ("molar", 1.0, 0.0),
    ("J/mol", "enthalpy"): ("molar", 1.0, 0.0),
    ("kJ/mol", "enthalpy"): ("molar", 1000.0, 0.0),
    ("Pa", "pressure"): ("molar", 1.0, 0.0),
    ("bar", "pressure"): ("molar", 100000.0, 0.0),
}


@lru_cache(maxsize=512)
def _affine(unit_text: str, kind: str):
    """(basis, scale, offset) with SI = value * scale + offset: ``SETTLED``'s, else
    ``pint_affine``'s."""
    settled = SETTLED.get((unit_text, kind))
    return settled if settled is not None else pint_affine(unit_text, kind)


def pint_affine(unit_text: str, kind: str):
    """(basis, scale, offset) with SI = value * scale + offset, derived from pint.

    Every supported conversion is affine (temperatures) or linear; deriving the map from
    pint's own conversion of 0 and 1 keeps pint the single source of unit definitions.
    """
    unit = _parse_unit(unit_text)
    basis = _dimension_of(unit, kind, unit_text)
    target = KINDS[kind][2]
    if basis == "mass":
        target = target.replace("mol", "g")
    ureg = registry()
    zero, one = ureg.Quantity(np.array([0.0, 1.0]), unit).to(target).magnitude
    scale, offset = float(one - zero), float(zero)
    if not (np.isfinite(scale) and np.isfinite(offset) and scale > 0):
        err = UnitError(f"unit '{unit_text}' converts with a factor {scale:g} to {target}",
                        expected="a unit with a finite, positive conversion factor")
        err.code = "UNIT-TOO-COMPLEX"
        raise err
    return basis, scale, offset


@lru_cache(maxsize=4096)
def parse_quantity(text: str, kind: str) -> float:
    """Parse a quantity string such as '-393.51 kJ/mol' to a float in the SI unit of ``kind``
    (remembered per text: a catalogue states the same anchors and pressures many times).

    A bare number (no unit) is an error: units are never guessed.
    """
    if not isinstance(text, str) or not text.strip():
        raise UnitError(f"quantity {text!r} is not a string with a unit",
                        expected="a number followed by a unit")
    parts = text.strip().split(None, 1)
    if not is_plain_number(parts[0]):
        raise UnitError(f"quantity '{text[:60]}' does not start with a plain number",
                        expected="a number in ASCII digits followed by a unit") from None
    number = float(parts[0])
    if not np.isfinite(number):
        raise UnitError(f"quantity '{text}' is not finite", expected="a finite number")
    if len(parts) < 2:
        raise UnitError(f"quantity '{text}' has no unit",
                        expected="a number followed by a unit, e.g. '-393.51 kJ/mol'")
    value = float(to_si([number], parts[1], kind)[0])
    if not np.isfinite(value):
        raise UnitError(f"quantity '{text[:60]}' overflows when converted to SI",
                        expected="a finite value")
    return value


def names_bare_calorie(unit_text: str) -> bool:
    """True when the unit uses a bare 'cal' (read as the thermochemical calorie)."""
    import re

    return re.search(r"(?<![A-Za-z_])k?cal(?![A-Za-z_])", unit_text) is not None
