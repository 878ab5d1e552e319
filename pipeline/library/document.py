"""Read a curated library and evaluate its species (the consumer side of export)."""

import errno
from pathlib import Path

import numpy as np

from ..core import jsonread, schemas
from ..core.constants import GAS_CONSTANT as R
from ..core.errors import InputError
from ..core.limits import MAX_LIBRARY_BYTES
from ..physics import basis, forms

#: name of the link in a release home that points at the published release
CURRENT = "current"


def load(path) -> dict:
    """library.json from a file or a curated folder; InputError with a clear message otherwise."""
    p = Path(path)
    if p.is_dir():
        p = release_folder(p) / "library.json"  # one release, even while a build publishes
    if not p.is_file():
        raise InputError(f"no library at {p}", expected="a library.json file or a curated folder")
    if p.stat().st_size > MAX_LIBRARY_BYTES:
        raise InputError(f"{p} is larger than {MAX_LIBRARY_BYTES} bytes",
                         expected="a library.json written by thermoledger")
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(f"{p} is not UTF-8 text (byte {exc.start})") from None
    doc = jsonread.loads(text, file=str(p))
    if not isinstance(doc, dict) or doc.get("library_format") != 1:
        raise InputError(f"{p} is not a thermoledger library", expected="library_format 1")
    errors = schemas.errors_of(doc, "library.schema.json")
    if errors:
        e = errors[0]
        where = "/".join(map(str, e.absolute_path)) or "(top level)"
        raise InputError(f"{p} breaks the library schema at {where}: {e.message[:200]} "
                         f"({len(errors)} problem(s))",
                         expected="a library.json written by thermoledger")
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


def ranges_of(species: dict) -> list:
    """(t_min [K], t_max [K], coefficients) of each range of a library species entry."""
    return [(r["t_min"], r["t_max"], r["coefficients"]) for r in species["ranges"]]


def check_range(species: dict, t) -> None:
    """InputError unless every T [K] is finite and inside the range of use of ``species``."""
    lo, hi = species["ranges"][0]["t_min"], species["ranges"][-1]["t_max"]
    bad = t[(t < lo) | (t > hi) | ~np.isfinite(t)]
    if len(bad):
        raise InputError(f"T = {bad[0]:g} K is outside the range of use of {species['id']}",
                         expected=f"{lo:g} K <= T <= {hi:g} K")


def evaluate_entry(species: dict, temperatures) -> dict:
    """Cp, H, S, G at ``temperatures`` [K], their standard uncertainties (u_Cp, u_H, u_S) and
    an 'extrapolated' flag; raises InputError outside the range of use."""
    t = np.atleast_1d(np.asarray(temperatures, dtype=float))
    check_range(species, t)
    out = forms.evaluate_ranges(ranges_of(species), t, species["form"])
    out.update(uncertainty(species, t))
    data = species["data_range"]
    out["extrapolated"] = (t < data["t_min"]) | (t > data["t_max"])
    return out


def uncertainty(species: dict, t) -> dict:
    """Standard uncertainties of Cp [J/(mol K)], H [J/mol], S [J/(mol K)] from the stored
    covariance of the scaled coefficients (H and S relative to their exact 298.15 K anchors),
    plus the extrapolation model's uncertainty inside extrapolated intervals."""
    t = np.atleast_1d(np.asarray(t, dtype=float))
    unc = species.get("uncertainty") or {}
    cov = np.asarray(unc.get("covariance") or [], dtype=float)
    powers = unc.get("powers") or []
    bps = species.get("breakpoints", [])
    edges = [species["ranges"][0]["t_min"]] + list(bps) + [species["ranges"][-1]["t_max"]]
    if cov.size == 0:
        zero = np.zeros_like(t)
        return {"u_Cp": zero, "u_H": zero.copy(), "u_S": zero.copy()}
    out = {}
    for key, rows, scale in (("u_Cp", basis.cp_rows(powers, t, bps), R),
                             ("u_H", basis.integral_rows(powers, t, bps, edges, "H"), R),
                             ("u_S", basis.integral_rows(powers, t, bps, edges, "S"), R)):
        var = np.einsum("ni,ij,nj->n", rows, cov, rows)
        out[key] = scale * np.sqrt(np.maximum(var, 0.0))
    guided = [e for e in species["extrapolated"] if e.get("u_rel_end")]
    cp = forms.evaluate_ranges(ranges_of(species), t, species["form"])["Cp"] if guided else None
    for e in guided:
        inside = (t >= e["t_min"]) & (t <= e["t_max"])
        span = np.log(e["t_max"] / e["t_min"]) or 1.0
        edge = e["t_min"] if e["t_max"] >= species["data_range"]["t_max"] else e["t_max"]
        frac = np.abs(np.log(t / edge)) / span
        extra = e["u_rel_end"] * frac * cp
        out["u_Cp"] = np.where(inside, np.hypot(out["u_Cp"], extra), out["u_Cp"])
    return out


def release_folder(path) -> Path:
    """The one release a reader should read: ``path/current`` resolved once when ``path``
    is a release home, else ``path`` itself."""
    p = Path(path)
    cur = p / CURRENT
    try:
        return cur.resolve(strict=True) if cur.is_symlink() else p
    except OSError as exc:
        if exc.errno in (errno.ENOENT, errno.ELOOP):
            return p
        raise
